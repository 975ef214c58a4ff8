"""Side-by-side encoder comparison for scripts/bench-engines (issue 18): kerf f32 and int8 against
sentence-transformers (PyTorch), ONNX Runtime fp32 and ONNX Runtime dynamic int8, on the same
texts, the same thread count, in alternating rounds.

Two roles in one file:
  driver  runs the rounds (each engine in its own process, engine order rotated every round),
          reads every engine's timing and vectors, prints tokens/s, ratios and cosines. Uses the
          standard library only, so the smoke mode (kerf f32 and int8) runs on a plain python3.
  worker  one engine, one timed pass, in the throw-away venv (torch, sentence-transformers,
          onnxruntime, numpy): `st`, `ort MODEL.onnx`, or `export CACHE_DIR` (the ONNX files).

Every engine is timed from texts to unit vectors: tokenising, batching, the encoder, mean
pooling and normalising, after one warm-up call of 16 texts; model loading is not timed.
"""

import array
import json
import math
import os
import platform
import subprocess
import sys
import time

MAX_TOKENS = 256  # the default model's max_seq_length (sentence_bert_config.json)
BATCH = 32  # sentence-transformers' default encode batch size; ORT uses the same
QUANTIZE = {"per_channel": True}  # ORT dynamic int8 settings (see worker_export)


def model_dir():
    home = os.environ.get("KERF_HOME") or os.path.expanduser("~/.cache/kerf")
    return os.path.join(home, "models", "all-MiniLM-L6-v2")


def read_texts(path):
    with open(path, encoding="utf-8") as f:
        return [json.loads(line)["text"] for line in f if line.strip()]


# ---------------------------------------------------------------- worker (venv only)


def worker_st(texts_path, threads, vectors_out):
    os.environ.setdefault("HF_HUB_OFFLINE", "1")
    import sentence_transformers
    import torch
    from sentence_transformers import SentenceTransformer

    torch.set_num_threads(threads)
    torch.set_num_interop_threads(1)
    texts = read_texts(texts_path)
    m = SentenceTransformer(model_dir(), device="cpu")
    assert m.max_seq_length == MAX_TOKENS, m.max_seq_length
    tokens = sum(min(len(m.tokenizer(t)["input_ids"]), m.max_seq_length) for t in texts)
    version = f"sentence-transformers {sentence_transformers.__version__}, torch {torch.__version__}"
    return timed_run(lambda ts: m.encode(ts, batch_size=BATCH, convert_to_numpy=True), texts, tokens, vectors_out, version)


def timed_run(encode, texts, tokens, vectors_out, version):
    """Warm `encode` up on a few texts, time it over all of them, write the vectors as
    little-endian f32 to VECTORS_OUT and return the worker's report."""
    import numpy as np

    encode(texts[:16])
    t = time.perf_counter()
    v = encode(texts)
    s = time.perf_counter() - t
    np.ascontiguousarray(v, dtype="<f4").tofile(vectors_out)
    return {"tokens": tokens, "seconds": s, "dimensions": int(v.shape[1]), "version": version}


def worker_ort(texts_path, threads, vectors_out, onnx_path):
    import numpy as np
    import onnxruntime as ort
    from transformers import AutoTokenizer

    texts = read_texts(texts_path)
    tok = AutoTokenizer.from_pretrained(model_dir())
    opts = ort.SessionOptions()
    opts.intra_op_num_threads = threads
    opts.inter_op_num_threads = 1
    opts.execution_mode = ort.ExecutionMode.ORT_SEQUENTIAL
    opts.graph_optimization_level = ort.GraphOptimizationLevel.ORT_ENABLE_ALL
    sess = ort.InferenceSession(onnx_path, opts, providers=["CPUExecutionProvider"])
    names = {i.name for i in sess.get_inputs()}

    def encode(batch_texts):
        # As sentence-transformers does: longest first, batches of 32 padded to their longest,
        # mean over the attention mask, unit length.
        order = sorted(range(len(batch_texts)), key=lambda i: -len(batch_texts[i]))
        rows = [None] * len(batch_texts)
        for b in range(0, len(order), BATCH):
            idx = order[b : b + BATCH]
            enc = tok(
                [batch_texts[i] for i in idx],
                padding=True,
                truncation=True,
                max_length=MAX_TOKENS,
                return_tensors="np",
            )
            feed = {k: enc[k].astype(np.int64) for k in ("input_ids", "attention_mask", "token_type_ids") if k in names}
            hidden = sess.run(None, feed)[0]
            mask = enc["attention_mask"][:, :, None].astype(np.float32)
            pooled = (hidden * mask).sum(1) / np.maximum(mask.sum(1), 1e-9)
            pooled /= np.maximum(np.linalg.norm(pooled, axis=1, keepdims=True), 1e-12)
            for i, row in zip(idx, pooled):
                rows[i] = row
        return np.stack(rows).astype(np.float32)

    tokens = sum(min(len(ids), MAX_TOKENS) for ids in tok(texts, truncation=True, max_length=MAX_TOKENS)["input_ids"])
    return timed_run(encode, texts, tokens, vectors_out, f"onnxruntime {ort.__version__}")


def worker_export(cache):
    """The default model's transformer as ONNX (torch.onnx), and its dynamic int8 quantisation
    (onnxruntime.quantization.quantize_dynamic with int8 weights per output channel).
    Kept in CACHE across runs; made again when the torch or onnxruntime version or these
    settings change.

    Per channel because it is the most accurate of the settings tried on this CPU (AVX2, no
    VNNI), 120 FAQ paragraphs, worst / mean cosine to sentence-transformers: the defaults (per
    tensor) 0.801 / 0.956, reduce_range 0.376 / 0.860, per_channel 0.982 / 0.993, per_channel
    with reduce_range 0.964 / 0.991, uint8 weights 0.921 / 0.981 (2026-12-04, onnxruntime
    1.32.0). Comparing kerf's int8 with ORT's defaults would flatter kerf."""
    import onnxruntime
    import torch
    from onnxruntime.quantization import QuantType, quantize_dynamic
    from transformers import AutoModel, AutoTokenizer

    os.makedirs(cache, exist_ok=True)
    fp32 = os.path.join(cache, "model.onnx")
    int8 = os.path.join(cache, "model-int8.onnx")
    stamp_path = os.path.join(cache, "versions.json")
    weights = os.path.join(model_dir(), "model.safetensors")
    stamp = {
        "torch": torch.__version__,
        "onnxruntime": onnxruntime.__version__,
        "weights_bytes": os.path.getsize(weights),
        "quantize_dynamic": QUANTIZE,
    }
    try:
        with open(stamp_path) as f:
            if json.load(f) == stamp and os.path.exists(fp32) and os.path.exists(int8):
                return {"fp32": fp32, "int8": int8, "made": False}
    except (OSError, ValueError):
        pass

    class Encoder(torch.nn.Module):
        def __init__(self, m):
            super().__init__()
            self.m = m

        def forward(self, input_ids, attention_mask, token_type_ids):
            return self.m(
                input_ids=input_ids, attention_mask=attention_mask, token_type_ids=token_type_ids
            ).last_hidden_state

    tok = AutoTokenizer.from_pretrained(model_dir())
    model = Encoder(AutoModel.from_pretrained(model_dir())).eval()
    enc = tok(["an example input", "a second, longer example input"], padding=True, return_tensors="pt")
    args = (enc["input_ids"], enc["attention_mask"], enc["token_type_ids"])
    names = ["input_ids", "attention_mask", "token_type_ids"]
    axes = {n: {0: "batch", 1: "sequence"} for n in names}
    axes["last_hidden_state"] = {0: "batch", 1: "sequence"}
    with torch.no_grad():
        torch.onnx.export(
            model,
            args,
            fp32,
            input_names=names,
            output_names=["last_hidden_state"],
            dynamic_axes=axes,
            opset_version=17,
            dynamo=False,
        )
    quantize_dynamic(fp32, int8, weight_type=QuantType.QInt8, **QUANTIZE)
    with open(stamp_path, "w") as f:
        json.dump(stamp, f)
    return {"fp32": fp32, "int8": int8, "made": True}


def worker(argv):
    role = argv[0]
    if role == "export":
        print(json.dumps(worker_export(argv[1])))
        return
    texts_path, threads, vectors_out = argv[1], int(argv[2]), argv[3]
    if role == "st":
        r = worker_st(texts_path, threads, vectors_out)
    elif role == "ort":
        r = worker_ort(texts_path, threads, vectors_out, argv[4])
    else:
        raise SystemExit(f"bench_engines worker: unknown role {role}")
    r["texts"] = len(read_texts(texts_path))
    r["tokens_per_second"] = r["tokens"] / r["seconds"]
    print(json.dumps(r))


# ---------------------------------------------------------------- driver (standard library)


def run_json(cmd, env=None, what=""):
    p = subprocess.run(cmd, capture_output=True, text=True, env=env)
    if p.returncode != 0:
        sys.stderr.write(p.stderr[-4000:])
        raise SystemExit(f"bench-engines: {what or cmd[0]} failed (exit {p.returncode})")
    lines = [line for line in p.stdout.splitlines() if line.startswith("{")]
    if not lines:
        raise SystemExit(f"bench-engines: {what or cmd[0]} printed no JSON result")
    return json.loads(lines[-1])


def read_vectors(path, n, dims):
    a = array.array("f")
    with open(path, "rb") as f:
        a.frombytes(f.read())
    if sys.byteorder != "little":
        a.byteswap()
    if len(a) != n * dims:
        raise SystemExit(f"bench-engines: {path} holds {len(a)} floats, expected {n} x {dims}")
    if not all(math.isfinite(x) for x in a):
        raise SystemExit(f"bench-engines: {path} holds a non-finite value")
    return [a[i * dims : (i + 1) * dims] for i in range(n)]


def cosines(a, b):
    out = []
    for x, y in zip(a, b):
        dot = sum(p * q for p, q in zip(x, y))
        nx = math.sqrt(sum(p * p for p in x))
        ny = math.sqrt(sum(q * q for q in y))
        out.append(dot / (nx * ny) if nx > 0 and ny > 0 else 0.0)
    return out


def loadavg():
    try:
        with open("/proc/loadavg") as f:
            return " ".join(f.read().split()[:3])
    except OSError:
        return "unknown"


def cpu_name():
    """The CPU's model name, family and model, and which of the instruction sets kerf's
    kernels choose between at run time it has, read from /proc/cpuinfo, so a record says
    which kernels ran (an earlier record copied its machine description by hand, wrongly)."""
    fields = {}
    try:
        with open("/proc/cpuinfo") as f:
            for line in f:
                if not line.strip():
                    break
                key, _, value = line.partition(":")
                fields[key.strip()] = value.strip()
    except OSError:
        return platform.processor() or "unknown"
    flags = set(fields.get("flags", "").split())
    wanted = [("avx2", "AVX2"), ("fma", "FMA"), ("avx512f", "AVX-512F"), ("avx512vl", "AVX512VL"),
              ("avx512_vnni", "AVX-512 VNNI"), ("avx_vnni", "AVX-VNNI")]
    have = ", ".join(name for flag, name in wanted if flag in flags) or "none of AVX2/AVX-512"
    return (f"{fields.get('model name', 'unknown')} (family {fields.get('cpu family', '?')}, "
            f"model {fields.get('model', '?')}; {have})")


def driver(args):
    bindir, texts_path, threads, rounds, work, smoke = (
        args["bin"],
        args["texts"],
        args["threads"],
        args["rounds"],
        args["work"],
        args["smoke"],
    )
    py = args.get("python")
    me = os.path.abspath(__file__)
    texts = read_texts(texts_path)
    n = len(texts)
    print(f"bench-engines: {n} texts, {threads} threads, {rounds} rounds, engine order rotated each round")
    print(f"machine: {cpu_name()}, {os.cpu_count()} logical CPUs, load average {loadavg()} at the start")

    engines = {}

    def kerf(precision):
        def cmd(out):
            env = dict(os.environ, KERF_BENCH_VECTORS=out)
            return [os.path.join(bindir, "examples", "embed_bench"), texts_path, str(threads), str(MAX_TOKENS), "packed", precision], env

        return cmd

    engines["kerf f32"] = kerf("f32")
    engines["kerf int8"] = kerf("int8")
    if not smoke:
        cache = args["onnx_cache"]
        made = run_json([py, me, "worker", "export", cache], what="ONNX export")
        print(f"ONNX files: {made['fp32']} and {made['int8']} ({'made now' if made['made'] else 'cached'})")
        engines["sentence-transformers"] = lambda out: ([py, me, "worker", "st", texts_path, str(threads), out], None)
        engines["ORT fp32"] = lambda out: ([py, me, "worker", "ort", texts_path, str(threads), out, made["fp32"]], None)
        engines["ORT int8"] = lambda out: ([py, me, "worker", "ort", texts_path, str(threads), out, made["int8"]], None)
    fma = "FMA peak"
    items = list(engines) + [fma]

    results = {e: [] for e in items}
    vectors = {}
    for r in range(rounds):
        order = items[r % len(items) :] + items[: r % len(items)]
        line = []
        for e in order:
            if e == fma:
                j = run_json([os.path.join(bindir, "examples", "fma_peak"), str(threads)], what="fma_peak")
                results[e].append(j["gflops"])
                line.append(f"{e} {j['gflops']:.0f} GFLOP/s")
                continue
            out = os.path.join(work, f"{e.replace(' ', '_')}.f32")
            cmd, env = engines[e](out)
            j = run_json(cmd, env=env, what=e)
            if j["texts"] != n:
                raise SystemExit(f"bench-engines: {e} embedded {j['texts']} texts, expected {n}")
            results[e].append(j)
            if e not in vectors:  # vectors of the first round; every round embeds the same texts
                vectors[e] = read_vectors(out, n, j["dimensions"])
            line.append(f"{e} {j['tokens_per_second']:,.0f}")
        print(f"round {r + 1} ({' -> '.join(order)}): " + "; ".join(line) + " tokens/s")
    print(f"load average {loadavg()} at the end")

    engine_names = list(engines)
    tps = {e: [j["tokens_per_second"] for j in results[e]] for e in engine_names}
    best = {e: max(v) for e, v in tps.items()}
    tokens = {e: results[e][0]["tokens"] for e in engine_names}
    print()
    print("tokens/s, each round and best (tokens counted by each engine's own tokenizer, truncated at 256):")
    for e in engine_names:
        extra = ""
        if "version" in results[e][0]:
            extra = f"  [{results[e][0]['version']}]"
        print(f"  {e:22} best {best[e]:>7,.0f}   rounds " + ", ".join(f"{x:,.0f}" for x in tps[e]) + f"   ({tokens[e]:,} tokens){extra}")
    if len(set(tokens.values())) > 1:
        print("  note: the engines count different token totals; ratios below are of time for the same texts")
    fmas = results[fma]
    print(f"  {'FMA peak (GFLOP/s)':22} best {max(fmas):>7,.0f}   rounds " + ", ".join(f"{x:.0f}" for x in fmas))
    g = [j["gflops_per_second"] for j in results["kerf f32"]]
    print(
        f"  kerf f32 GFLOP/s: " + ", ".join(f"{x:.0f}" for x in g)
        + "; share of the same round's FMA peak: "
        + ", ".join(f"{100 * x / p:.0f}%" for x, p in zip(g, fmas))
        + f"; best over best {100 * max(g) / max(fmas):.0f}%"
    )

    def ratio(a, b):
        # Time for the same texts, so the engines' token counts need not agree.
        per_round = [jb["seconds"] / ja["seconds"] for ja, jb in zip(results[a], results[b])]
        best_ratio = min(j["seconds"] for j in results[b]) / min(j["seconds"] for j in results[a])
        return best_ratio, per_round

    named = [("kerf f32", "ORT fp32"), ("kerf int8", "ORT int8"), ("kerf f32", "sentence-transformers"),
             ("kerf int8", "sentence-transformers"), ("ORT fp32", "sentence-transformers"),
             ("ORT int8", "sentence-transformers"), ("kerf int8", "kerf f32"), ("ORT int8", "ORT fp32")]
    print()
    print("speed ratios (best round over best round; in brackets each round, same round):")
    for a, b in named:
        if a in engines and b in engines:
            br, pr = ratio(a, b)
            print(f"  {a + ' / ' + b:42} {br:.2f}x   [" + ", ".join(f"{x:.2f}" for x in pr) + f"; range {min(pr):.2f}-{max(pr):.2f}]")
    print("  every pair, best over best (row / column):")
    print("  " + " " * 22 + "".join(f"{e:>22}" for e in engine_names))
    for a in engine_names:
        print(f"  {a:22}" + "".join(f"{ratio(a, b)[0]:>21.2f}x" for b in engine_names))

    print()
    print("cosine to the reference vectors (worst, mean over the texts):")
    pairs = []
    if "sentence-transformers" in engines:
        pairs += [(e, "sentence-transformers") for e in engine_names if e != "sentence-transformers"]
    pairs += [("kerf int8", "kerf f32")]
    if "ORT int8" in engines:
        pairs += [("ORT int8", "ORT fp32")]
    worst_int8 = None
    for a, b in pairs:
        c = cosines(vectors[a], vectors[b])
        lo = min(c)
        i = c.index(lo)
        print(f"  {a + ' vs ' + b:42} worst {lo:.5f}  mean {sum(c) / len(c):.5f}   (worst: text {i + 1}, {texts[i][:40]!r})")
        if (a, b) == ("kerf int8", "kerf f32"):
            worst_int8 = lo
    return worst_int8


def main():
    if len(sys.argv) > 1 and sys.argv[1] == "worker":
        worker(sys.argv[2:])
        return
    args = json.loads(sys.argv[1])
    worst = driver(args)
    floor = args.get("min_int8_cosine")
    if floor is not None and worst is not None and worst < floor:
        raise SystemExit(f"bench-engines: kerf int8's worst cosine to kerf f32 is {worst:.5f}, under the README's {floor}")


if __name__ == "__main__":
    main()
