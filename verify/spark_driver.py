"""Scores SQL statements in one long-lived PySpark session for sawmill's
spark runner (verify/sql_spark.go), which embeds this file and starts it.

Requests come one JSON object a line on stdin, answers go one a line to
stdout; nothing else is written to stdout. A request:

  {"table": "`t`", "columns": ["id", "a"], "rows": [[0, "3ff0000000000000"], [1, null]],
   "sql": "...", "outputs": 2, "label": true, "ansi": true}

Row values are the hex of the float64's bits (big-endian, as Go's
strconv.FormatUint(math.Float64bits(v), 16) pads to 16 digits), null for
SQL NULL; the first column is the row number. The answer holds every result
row as [id, hex..., label], the plan time (analysis, optimisation and
physical planning, ms), the run time (ms), and the largest method the
whole-stage code generator wrote for the plan, in bytes of bytecode
(org.apache.spark.sql.execution.debug.codegenStringSeq), with the number of
whole-stage subtrees: the Go side refuses a plan whose generated code
Spark or the JVM would leave uncompiled.
"""
import json
import os
import struct
import sys
import time


def bits_to_float(h):
    return struct.unpack(">d", bytes.fromhex(h))[0]


def float_to_bits(v):
    return struct.pack(">d", v).hex()


def session():
    from pyspark.sql import SparkSession

    b = (SparkSession.builder.master(os.environ.get("SAWMILL_SPARK_MASTER", "local[2]"))
         .appName("sawmill-verify")
         .config("spark.ui.enabled", "false")
         .config("spark.sql.shuffle.partitions", "2")
         .config("spark.ui.showConsoleProgress", "false")
         # A generated class that fails to compile fails the query instead of
         # falling back to interpreted evaluation unnoticed.
         .config("spark.sql.codegen.fallback", "false")
         # and an expression whose code fails to compile fails too, instead of
         # being evaluated by the interpreter (an internal setting of Spark's)
         .config("spark.sql.codegen.factoryMode", "CODEGEN_ONLY")
         .config("spark.driver.memory", os.environ.get("SAWMILL_SPARK_MEMORY", "2g"))
         .config("spark.driver.extraJavaOptions", "-Dlog4j2.level=OFF")
         )
    s = b.getOrCreate()
    s.sparkContext.setLogLevel("OFF")
    return s


def codegen_stats(spark, plan):
    """Largest generated method (bytes of bytecode) and whole-stage subtrees."""
    seq = spark._jvm.org.apache.spark.sql.execution.debug.package.codegenStringSeq(plan)
    largest, n = 0, seq.size()
    for i in range(n):
        largest = max(largest, seq.apply(i)._3().maxMethodCodeSize())
    return largest, n


def projections(df):
    """Projections in the optimized plan: how many stages of the statement
    Spark's CollapseProject kept apart."""
    n, todo = 0, [df._jdf.queryExecution().optimizedPlan()]
    while todo:
        node = todo.pop()
        n += node.nodeName() == "Project"
        todo.extend(node.children().apply(i) for i in range(node.children().size()))
    return n


def run_query(spark, sql):
    """Plans and collects sql, timing each. When whole-stage code generation
    cannot compile the plan (a method past the JVM's 64 KB), the query runs
    again with it off, each expression compiled on its own (what Spark does
    itself, with a warning in its log, under its default
    spark.sql.codegen.fallback=true); the answer says so in "wscg_off"."""
    wscg_off = ""
    for whole_stage in ("true", "false"):
        spark.conf.set("spark.sql.codegen.wholeStage", whole_stage)
        try:
            start = time.perf_counter()
            df = spark.sql(sql)
            plan = df._jdf.queryExecution().executedPlan()
            plan_ms = (time.perf_counter() - start) * 1000
            start = time.perf_counter()
            largest, stages = codegen_stats(spark, plan) if whole_stage == "true" else (0, 0)
            codegen_ms = (time.perf_counter() - start) * 1000
            start = time.perf_counter()
            got = df.collect()
            run_ms = (time.perf_counter() - start) * 1000
            break
        except Exception as e:
            causes = [l.strip() for l in str(e).split("\n") if "grows beyond 64 KB" in l]
            if whole_stage == "false" or not causes:
                raise
            wscg_off = causes[-1][:300]
        finally:
            spark.conf.set("spark.sql.codegen.wholeStage", "true")
    return got, {"plan_ms": plan_ms, "codegen_ms": codegen_ms, "run_ms": run_ms, "max_method": largest,
                 "wscg": stages, "wscg_off": wscg_off, "version": spark.version,
                 "projections": projections(df),
                 "huge_method_limit": int(spark.conf.get("spark.sql.codegen.hugeMethodLimit"))}


def run_setup(spark, req):
    """Runs the request's setup statements (the function form's CREATE
    FUNCTION, a benchmark's tables) in order; returns their time in ms."""
    start = time.perf_counter()
    for s in req.get("setup", []):
        spark.sql(s).collect()
    return (time.perf_counter() - start) * 1000


def score(spark, req):
    from pyspark.sql.types import DoubleType, LongType, StructField, StructType

    cols = req["columns"]
    schema = StructType([StructField(cols[0], LongType(), False)] +
                        [StructField(c, DoubleType(), True) for c in cols[1:]])
    data = [tuple([r[0]] + [None if v is None else bits_to_float(v) for v in r[1:]]) for r in req["rows"]]
    spark.conf.set("spark.sql.ansi.enabled", "true" if req.get("ansi", True) else "false")
    spark.createDataFrame(data, schema, verifySchema=False).createOrReplaceTempView(req["table"])
    setup_ms = run_setup(spark, req)
    got, m = run_query(spark, req["sql"])
    k, label = req["outputs"], req["label"]
    out = []
    for row in got:
        vals = [int(row[0])]
        for j in range(k):
            v = row[len(row) - k - (1 if label else 0) + j]
            vals.append(None if v is None else float_to_bits(v))
        if label:
            vals.append(row[len(row) - 1])
        out.append(vals)
    return dict(m, ok=True, rows=out, setup_ms=setup_ms)


def execute(spark, req):
    """Runs the setup statements, then plans and collects the query: for
    benchmarks, whose rows Spark makes itself. Doubles come back as hex."""
    spark.conf.set("spark.sql.ansi.enabled", "true" if req.get("ansi", True) else "false")
    setup_ms = run_setup(spark, req)
    got, m = run_query(spark, req["sql"])
    rows = [[float_to_bits(v) if isinstance(v, float) else v for v in row] for row in got]
    return dict(m, ok=True, rows=rows, setup_ms=setup_ms)


def main():
    spark = session()
    print(json.dumps({"ok": True, "version": spark.version}), flush=True)
    for line in sys.stdin:
        if not line.strip():
            continue
        try:
            req = json.loads(line)
            ans = execute(spark, req) if req.get("op") == "exec" else score(spark, req)
        except Exception as e:  # the answer carries the engine's message
            text = str(e)
            msg = text.split("\n\tat ")[0]
            causes = [l.strip() for l in text.split("\n") if l.strip().startswith("Caused by:")]
            if causes:  # the root cause says why (a method past 64 KB, ...)
                msg = msg[:1500] + "\n" + causes[-1][:2000]
            # Janino's message quotes a whole method signature first; the
            # reason is at the end.
            ans = {"ok": False, "error": msg if len(msg) <= 4000 else msg[:1500] + " … " + msg[-2000:]}
        print(json.dumps(ans), flush=True)
    spark.stop()


if __name__ == "__main__":
    main()
