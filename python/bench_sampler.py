"""The call in a sampler's inner loop from Python, beside the same call in Rust and the
`efold predict` process.

    python python/bench_sampler.py [--binary target/release/efold] [--calls 20000]

Times `model.with_params(alpha=...).predict(efolds=[50, 55, 60])` on the order-2 pole model
(alternating alpha between 0.9 and 1.1, as `cargo bench --bench sampler_call` does in Rust),
and `efold predict MODEL --param alpha=... --efolds 50,55,60 --format json` as a process. Prints
the median over repeats of the time per call."""

import argparse
import pathlib
import statistics
import subprocess
import time

import efold

ROOT = pathlib.Path(__file__).resolve().parents[1]
MODEL = ROOT / "models" / "pole-order-2-quadratic.toml"


def per_call(fn, calls, repeats=7):
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        for i in range(calls):
            fn(i)
        times.append((time.perf_counter() - t0) / calls)
    return statistics.median(times)


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--binary", default=str(ROOT / "target" / "release" / "efold"))
    ap.add_argument("--calls", type=int, default=20000)
    ap.add_argument("--process-calls", type=int, default=100)
    a = ap.parse_args()

    model = efold.Model.from_file(MODEL)
    alphas = (1.1, 0.9)

    def python_call(i):
        return model.with_params(alpha=alphas[i % 2]).predict(efolds=[50, 55, 60])

    def process_call(i):
        subprocess.run(
            [a.binary, "predict", str(MODEL), "--param", f"alpha={alphas[i % 2]}", "--efolds", "50,55,60",
             "--format", "json"],
            check=True,
            capture_output=True,
        )

    python_call(0)
    t_py = per_call(python_call, a.calls)
    t_proc = per_call(process_call, a.process_calls, repeats=3)
    print(f"python  with_params(...).predict(...)   {t_py * 1e6:9.1f} us per call")
    print(f"process efold predict --format json    {t_proc * 1e6:9.1f} us per call")
    print(f"process / python                        {t_proc / t_py:9.1f}x")


if __name__ == "__main__":
    main()
