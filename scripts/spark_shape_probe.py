"""Scores one spark statement (sawmill compile --dialect spark, table
`bench`) over rows made in Spark, and prints what shapes a forest's
statement for Spark: plan time, the largest whole-stage method, the
projections in the optimized plan and the largest expression of each, and
the rows scored a second (docs/spark-limits.md).

  .venv/bin/python scripts/spark_shape_probe.py DATA.csv score.sql ROWS [conf=value ...]

DATA.csv is the training data of bench/sqlscale (Breast Cancer
Wisconsin (Diagnostic), as golden/testdata/sklearn-breast-cancer ships it):
feature j of row i is lo_j + span_j * (((i*a_j + b_j) mod 1000003) /
1000003), as bench/sqlscale makes it. Extra arguments are Spark settings,
e.g. spark.sql.codegen.wholeStage=false. SPARK_PROBE_MEMORY sets the
driver's heap (default 4g). The statement must output `benign` and
`malignant`.
"""
import csv
import os
import sys
import tempfile
import time

from pyspark.sql import SparkSession


def session(confs):
    b = (SparkSession.builder.master("local[2]").appName("sawmill-shape-probe")
         .config("spark.ui.enabled", "false")
         .config("spark.ui.showConsoleProgress", "false")
         .config("spark.driver.memory", os.environ.get("SPARK_PROBE_MEMORY", "4g"))
         .config("spark.sql.codegen.fallback", "false")
         .config("spark.sql.codegen.factoryMode", "CODEGEN_ONLY"))
    for k, v in confs.items():
        b = b.config(k, v)
    s = b.getOrCreate()
    s.sparkContext.setLogLevel("ERROR")
    return s


def make_rows(spark, data, n, path):
    rows = list(csv.reader(open(data)))
    names = [c for c in rows[0] if c != "label"]
    values = [[float(r[j]) for j in range(len(names))] for r in rows[1:]]
    cols = []
    for j, name in enumerate(names):
        lo = min(r[j] for r in values)
        span = max(r[j] for r in values) - lo
        cols.append(f"{lo!r}D + {span!r}D * (CAST(((id * {7919 + 2 * j * 104729} + {1 + j * 65537}) % 1000003)"
                    f" AS DOUBLE) / 1000003D) AS `{name}`")
    spark.sql(f"INSERT OVERWRITE DIRECTORY '{path}' USING parquet SELECT {', '.join(cols)} FROM range({n})").collect()
    spark.sql(f"CREATE OR REPLACE TEMPORARY VIEW bench USING parquet OPTIONS (path '{path}')")


def projections(plan):
    """The largest expression (characters) of each projection, top down."""
    out, todo = [], [plan]
    while todo:
        node = todo.pop()
        if node.nodeName() == "Project":
            items = node.projectList()
            out.append(max(len(items.apply(i).toString()) for i in range(items.size())))
        todo.extend(node.children().apply(i) for i in range(node.children().size()))
    return out


def main():
    data, sql, n = sys.argv[1], sys.argv[2], int(sys.argv[3])
    spark = session(dict(a.split("=", 1) for a in sys.argv[4:]))
    with tempfile.TemporaryDirectory() as tmp:
        make_rows(spark, data, n, tmp + "/bench")
        q = open(sql).read().strip().rstrip(";")
        q = "SELECT COUNT(*), SUM(`benign`), SUM(`malignant`) FROM (\n" + q + "\n) s"
        start = time.perf_counter()
        df = spark.sql(q)
        plan = df._jdf.queryExecution().executedPlan()
        plan_s = time.perf_counter() - start
        shape = projections(df._jdf.queryExecution().optimizedPlan())
        seq = spark._jvm.org.apache.spark.sql.execution.debug.package.codegenStringSeq(plan)
        largest = max([seq.apply(i)._3().maxMethodCodeSize() for i in range(seq.size())] or [0])
        start = time.perf_counter()
        got = df.collect()
        run_s = time.perf_counter() - start
    print(f"plan {plan_s:.1f} s; {len(shape)} projections, largest expression of each (characters): {shape}")
    print(f"largest whole-stage method {largest} bytes; run {run_s:.1f} s, {n / run_s:.0f} rows/s; load {os.getloadavg()[0]:.1f}")
    print(f"aggregates: {list(got[0])}")


if __name__ == "__main__":
    main()
