package verify

import (
	"context"
	dbsql "database/sql"
	"net"
	"sync/atomic"
	"testing"
	"time"

	"github.com/stretchr/testify/require"
)

// TestPingPatiently: against a listener that accepts connections and never
// answers (a server too busy to speak), pingPatiently tries as often as
// asked, each try bounded, and says so; against a closed port (no server)
// it gives up after one try.
func TestPingPatiently(t *testing.T) {
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	require.NoError(t, err)
	defer ln.Close()
	var accepted atomic.Int32
	go func() {
		var held []net.Conn
		defer func() {
			for _, c := range held {
				c.Close()
			}
		}()
		for {
			c, err := ln.Accept()
			if err != nil {
				return
			}
			accepted.Add(1)
			held = append(held, c)
		}
	}()
	db, err := dbsql.Open("pgx", "postgres://sawmill@"+ln.Addr().String()+"/sawmill?sslmode=disable")
	require.NoError(t, err)
	defer db.Close()
	start := time.Now()
	err = pingPatiently(context.Background(), db, 3, 300*time.Millisecond)
	require.Error(t, err)
	require.Contains(t, err.Error(), "3 tries of 300ms")
	require.EqualValues(t, 3, accepted.Load(), "one connection a try")
	require.Less(t, time.Since(start), 5*time.Second)

	closed, err := net.Listen("tcp", "127.0.0.1:0")
	require.NoError(t, err)
	addr := closed.Addr().String()
	closed.Close()
	db2, err := dbsql.Open("pgx", "postgres://sawmill@"+addr+"/sawmill?sslmode=disable")
	require.NoError(t, err)
	defer db2.Close()
	err = pingPatiently(context.Background(), db2, 3, 300*time.Millisecond)
	require.Error(t, err)
	require.NotContains(t, err.Error(), "tries of", "a refused connection is not tried again")
}
