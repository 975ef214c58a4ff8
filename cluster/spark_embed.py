#!/usr/bin/env python3
"""Run a kerf profile as a stage of an Apache Spark job.

Reads a table of documents (JSONL or Parquet, with an id and a text column), pipes each
partition through `kerf embed --relay` (one kerf process per partition: the model loads once per
partition, memory stays bounded), parses its lines into rows of chunks and documents with their
vectors, and writes them as one Parquet dataset partitioned by `kind`:

    OUT/kind=chunk/     doc, chunk, byte_start, byte_end, tokens, vector   (one row per chunk)
    OUT/kind=document/  doc, chunks, vector                                (one row per document)

The kerf binary, the profile and the model folder are shipped to the executors with
SparkContext.addFile (the binary and profile as files, the model folder recursively), so the
executors need nothing installed but Python; `--no-ship` uses the paths as they are instead (a
filesystem every executor mounts at the same place).

A partition whose kerf process fails, or whose stream lacks kerf's end line or has the wrong
document count, raises: Spark then retries the task, and only the rows of the attempt that
succeeds reach the output.

    spark-submit cluster/spark_embed.py --documents docs.jsonl --profile p.toml \\
        --kerf target/release/kerf --model ~/.cache/kerf/models/all-MiniLM-L6-v2 --out vectors

Prints one JSON line at the end: the counts of the written dataset as Spark reads it back.
"""
import argparse
import base64
import json
import os
import signal
import struct
import subprocess
import sys
import tempfile
import threading


def parse_args(argv):
    p = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    p.add_argument("--documents", required=True, help="documents table: .jsonl/.json or Parquet")
    p.add_argument("--id-column", default="id")
    p.add_argument("--text-column", default="text")
    p.add_argument("--profile", required=True, help="kerf profile (TOML)")
    p.add_argument("--kerf", required=True, help="the kerf binary (built for the executors)")
    p.add_argument("--model", help="model folder (default: the profile's, or kerf's default)")
    p.add_argument("--out", required=True, help="output folder (Parquet dataset); must not exist")
    p.add_argument("--partitions", type=int, default=0, help="partitions (0: Spark's default)")
    p.add_argument("--master", help="Spark master (default: spark-submit's)")
    p.add_argument("--cache", help="a kerf vector cache path on every executor (default: none)")
    p.add_argument("--kerf-arg", action="append", default=[],
                   help="one more argument for `kerf embed` (repeat), e.g. --kerf-arg=--threads=1")
    p.add_argument("--no-ship", action="store_true",
                   help="use --kerf, --profile and --model paths as they are on the executors")
    return p.parse_args(argv)


def relay_partition(rows, conf):
    """Pipe one partition's documents through `kerf embed --relay`; yield output rows."""
    if conf["ship"]:
        from pyspark import SparkFiles

        kerf = SparkFiles.get(os.path.basename(conf["kerf"]))
        profile = SparkFiles.get(os.path.basename(conf["profile"]))
        model = SparkFiles.get(os.path.basename(conf["model"].rstrip("/"))) if conf["model"] else None
    else:
        kerf, profile, model = conf["kerf"], conf["profile"], conf["model"]
    if not os.access(kerf, os.X_OK):
        os.chmod(kerf, 0o755)
    cmd = [kerf, "embed", "--relay", "-p", profile, "-", "--vector-text", "base64", "-q"]
    if model:
        cmd += ["--model", model]
    cmd += ["--cache", conf["cache"]] if conf["cache"] else ["--no-cache"]
    cmd += conf["extra"]
    err = tempfile.TemporaryFile()
    proc = subprocess.Popen(cmd, stdin=subprocess.PIPE, stdout=subprocess.PIPE, stderr=err)
    sent = [0]

    def feed():
        try:
            for r in rows:
                line = json.dumps({"id": str(r[0]), "text": r[1] if r[1] is not None else ""})
                proc.stdin.write(line.encode("utf-8") + b"\n")
                sent[0] += 1
            proc.stdin.close()
        except (BrokenPipeError, ValueError):
            pass  # kerf stopped reading: its exit status says why

    feeder = threading.Thread(target=feed, daemon=True)
    feeder.start()
    # Test hook: kill this partition's kerf process once, part way, so that Spark must retry
    # the task (the first task to create the marker file does it).
    kill_marker = os.environ.get("KERF_SPARK_KILL_ONCE")
    end = None
    for raw in proc.stdout:
        line = json.loads(raw)
        kind = line["kind"]
        if kind == "end":
            end = line
            continue
        b64 = line.get("vector_b64")
        vector = None
        if b64 is not None:
            data = base64.b64decode(b64)
            vector = list(struct.unpack("<%df" % (len(data) // 4), data))
        if kind == "chunk":
            yield (kind, line["doc"], line["chunk"], line["bytes"][0], line["bytes"][1],
                   line["tokens"], None, vector)
        else:
            yield (kind, line["doc"], None, None, None, None, line["chunks"], vector)
            if kill_marker:
                try:
                    fd = os.open(kill_marker, os.O_CREAT | os.O_EXCL | os.O_WRONLY)
                    os.write(fd, str(proc.pid).encode())
                    os.close(fd)
                    os.kill(proc.pid, signal.SIGKILL)
                except FileExistsError:
                    pass
    code = proc.wait()
    feeder.join()
    err.seek(0)
    message = err.read().decode("utf-8", "replace").strip()
    if code != 0:
        raise RuntimeError("kerf exited with %s: %s" % (code, message))
    if end is None or end["documents"] != sent[0]:
        raise RuntimeError("kerf's stream is incomplete: %d documents sent, end line %r; %s"
                           % (sent[0], end, message))


def main(argv):
    a = parse_args(argv)
    from pyspark.sql import SparkSession
    from pyspark.sql import functions as F
    from pyspark.sql.types import (ArrayType, FloatType, IntegerType, LongType, StringType,
                                   StructField, StructType)

    builder = SparkSession.builder.appName("kerf-embed").config("spark.ui.enabled", "false")
    if a.master:
        builder = builder.master(a.master)
    spark = builder.getOrCreate()
    sc = spark.sparkContext
    sc.setLogLevel("WARN")
    conf = {"kerf": os.path.abspath(a.kerf), "profile": os.path.abspath(a.profile),
            "model": os.path.abspath(a.model) if a.model else None, "cache": a.cache,
            "ship": not a.no_ship, "extra": a.kerf_arg}
    if conf["ship"]:
        sc.addFile(conf["kerf"])
        sc.addFile(conf["profile"])
        if conf["model"]:
            sc.addFile(conf["model"], recursive=True)

    if a.documents.endswith((".jsonl", ".json", ".ndjson")):
        docs = spark.read.json(a.documents)
    else:
        docs = spark.read.parquet(a.documents)
    docs = docs.select(F.col(a.id_column).cast("string"), F.col(a.text_column))
    if a.partitions > 0:
        # Hash partitioning by id: the same documents land in the same partition on a retry.
        docs = docs.repartition(a.partitions, F.col(a.id_column))

    schema = StructType([
        StructField("kind", StringType(), False),
        StructField("doc", StringType(), False),
        StructField("chunk", IntegerType(), True),
        StructField("byte_start", LongType(), True),
        StructField("byte_end", LongType(), True),
        StructField("tokens", IntegerType(), True),
        StructField("chunks", IntegerType(), True),
        StructField("vector", ArrayType(FloatType(), False), True),
    ])
    rows = docs.rdd.mapPartitions(lambda part: relay_partition(part, conf))
    spark.createDataFrame(rows, schema).write.mode("error").partitionBy("kind").parquet(a.out)

    # Read the dataset back with Spark's own Parquet reader and report its counts.
    back = spark.read.parquet(a.out)
    counts = {r["kind"]: r["count"] for r in back.groupBy("kind").count().collect()}
    with_vectors = back.filter((F.col("kind") == "document") & F.col("vector").isNotNull()).count()
    print(json.dumps({"chunks": counts.get("chunk", 0), "documents": counts.get("document", 0),
                      "documents_with_vectors": with_vectors}))
    spark.stop()


if __name__ == "__main__":
    main(sys.argv[1:])
