#!/usr/bin/env python3
"""Load the parts of a sharded kerf output folder as one Spark dataset.

`kerf embed --shard I/N --format parquet --out DIR` writes each shard's folder as DIR/shard=I
(chunks.parquet, documents.parquet, chunks.jsonl, manifest.json). Spark reads the Parquet tables
of all shards as one DataFrame, with the shard as a column taken from the folder names:

    spark.read.option("basePath", DIR).parquet(DIR + "/shard=*/chunks.parquet")

This script does that for chunks and documents and prints one JSON line with the rows per shard,
e.g. to check a job array's output before using it:

    python cluster/read_kerf_parts.py --folder DIR [--master local[1]]
"""
import argparse
import json
import sys


def main(argv):
    p = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    p.add_argument("--folder", required=True, help="the --out folder of the sharded runs")
    p.add_argument("--master", help="Spark master (default: spark-submit's)")
    a = p.parse_args(argv)
    from pyspark.sql import SparkSession

    builder = SparkSession.builder.appName("kerf-read-parts").config("spark.ui.enabled", "false")
    if a.master:
        builder = builder.master(a.master)
    spark = builder.getOrCreate()
    spark.sparkContext.setLogLevel("WARN")
    out = {}
    for table in ("chunks", "documents"):
        df = spark.read.option("basePath", a.folder).parquet(a.folder + "/shard=*/%s.parquet" % table)
        rows = df.groupBy("shard").count().collect()
        out[table] = {str(r["shard"]): r["count"] for r in rows}
        out[table + "_distinct_docs"] = df.select("doc").distinct().count()
    print(json.dumps(out, sort_keys=True))
    spark.stop()


if __name__ == "__main__":
    main(sys.argv[1:])
