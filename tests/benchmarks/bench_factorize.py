"""Speed of JointNMF against scikit-learn's NMF(solver="mu") on the concatenated matrix.

Usage: python tests/benchmarks/bench_factorize.py [--sizes 2000 10000] [--sk-iter 500] [--threads 1]

Both sides run with the same BLAS thread count (default 1: on a shared machine two BLAS
threads per process were measured slower than one).

Invented data: 3 modalities x 2,000 features with 6 planted patient programmes, a
20-nearest-neighbour patient graph (found on a 30-dimensional random projection, so that
building it does not dominate at N = 10,000), rank 6, one run per measurement.

Rows printed per cohort size:
  (a) seconds per outer iteration, ours (with the graph; a 60-iteration fit, set-up included)
      / scikit-learn (a --sk-iter fit / --sk-iter)
  (b) seconds to reach the objective scikit-learn reaches after --sk-iter iterations,
      ours (same objective: lambda = 0, modality weights 1) / scikit-learn
  (c) bytes of X read per second by our iteration (two passes) / by a plain X.sum()
  peak memory traced during our fit (tracemalloc), next to the size of X
"""

from __future__ import annotations

import argparse
import time
import tracemalloc
import warnings

import numpy as np
from sklearn.decomposition import NMF
from sklearn.exceptions import ConvergenceWarning
from sklearn.neighbors import kneighbors_graph
from threadpoolctl import threadpool_limits

from strataweave.factorize import JointNMF
from strataweave.factorize.init import initial_factors
from strataweave.factorize.views import prepare_views

RANK, N_FEATURES, N_VIEWS, N_NEIGHBOURS, TIMED_ITERATIONS = 6, 2000, 3, 20, 60
GRAPH_WEIGHT = 1.0


def make_views(n_patients: int, seed: int = 0) -> list[np.ndarray]:
    rng = np.random.default_rng(seed)
    programmes = np.eye(RANK)[rng.integers(0, RANK, n_patients)] + 0.2 * rng.random((n_patients, RANK))
    return [programmes @ rng.gamma(0.5, 1.0, (RANK, N_FEATURES)) + 0.5 * rng.random((n_patients, N_FEATURES))
            for _ in range(N_VIEWS)]


def make_graph(views: list[np.ndarray], seed: int = 0):
    rng = np.random.default_rng(seed)
    projected = sum(v @ rng.standard_normal((v.shape[1], 30)) for v in views)
    graph = kneighbors_graph(projected, N_NEIGHBOURS, include_self=False)
    return ((graph + graph.T) / 2).tocsr()


def timed(call):
    start = time.perf_counter()
    result = call()
    return time.perf_counter() - start, result


def quiet_fit(model, views, graph, W0, H0):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        return model.fit(views, graph, W_init=W0, H_init=H0)


def bench(n_patients: int, sk_iter: int) -> dict[str, float]:
    views = make_views(n_patients)
    graph = make_graph(views)
    X = np.hstack(views)
    unit = [1.0] * N_VIEWS
    W0, H0 = initial_factors(prepare_views(views, weights=unit).blocks, n_patients, RANK, "nndsvda", np.random.default_rng(0))

    sk = NMF(RANK, init="custom", solver="mu", beta_loss="frobenius", max_iter=sk_iter, tol=0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        sk_time, W_sk = timed(lambda: sk.fit_transform(X, W=W0.copy(), H=np.hstack(H0)))
    sk_objective = float(np.sum((X - W_sk @ sk.components_) ** 2))

    def with_graph(count: int, dtype: str = "float64") -> JointNMF:
        return JointNMF(RANK, graph_weight=GRAPH_WEIGHT, max_iter=count, tol=0, dtype=dtype)

    per_iter = {}
    for dtype in ("float64", "float32"):
        data = [v.astype(dtype) for v in views]
        model = with_graph(TIMED_ITERATIONS, dtype)
        per_iter[dtype] = timed(lambda: quiet_fit(model, data, graph, W0, H0))[0] / TIMED_ITERATIONS
    tracemalloc.start()
    quiet_fit(with_graph(5), views, graph, W0, H0)  # peak memory is reached in the first iterations
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()

    plain = JointNMF(RANK, graph_weight=0.0, modality_weights=unit, max_iter=sk_iter, tol=0)
    trace = quiet_fit(plain, views, None, W0, H0).objective_
    reached = np.flatnonzero(trace <= sk_objective)
    if reached.size:
        catch_up = JointNMF(RANK, graph_weight=0.0, modality_weights=unit, max_iter=int(reached[0]) + 1, tol=0)
        catch_up_time, _ = timed(lambda: quiet_fit(catch_up, views, None, W0, H0))
    else:
        catch_up_time = float("nan")
    sum_time = min(timed(X.sum)[0] for _ in range(5))
    sk_per_iter = sk_time / sk_iter
    return {
        "sk_s_per_iter": sk_per_iter,
        "ours_s_per_iter": per_iter["float64"],
        "ours32_s_per_iter": per_iter["float32"],
        "a_ratio": per_iter["float64"] / sk_per_iter,
        "b_iterations": float(reached[0] + 1) if reached.size else float("nan"),
        "b_ratio": catch_up_time / sk_time,
        "c_ratio": (2 * X.nbytes / per_iter["float64"]) / (X.nbytes / sum_time),
        "c_gb_per_s": 2 * X.nbytes / per_iter["float64"] / 1e9,
        "peak_mb": peak / 2**20,
        "x_mb": X.nbytes / 2**20,
    }


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--sizes", type=int, nargs="+", default=[2000, 10000])
    parser.add_argument("--sk-iter", type=int, default=500)
    parser.add_argument("--threads", type=int, default=1)
    args = parser.parse_args()
    with threadpool_limits(args.threads, user_api="blas"):
        rows = {n: bench(n, args.sk_iter) for n in args.sizes}
    print(f"{'measure':<44}" + "".join(f"{f'N={n}':>12}" for n in rows))
    labels = [
        ("sk_s_per_iter", "scikit-learn s / iteration"),
        ("ours_s_per_iter", "ours s / outer iteration (float64, graph)"),
        ("ours32_s_per_iter", "ours s / outer iteration (float32, graph)"),
        ("a_ratio", "(a) per-iteration time ratio (target <= 1.2)"),
        ("b_iterations", "(b) our iterations to sklearn's objective"),
        ("b_ratio", "(b) time-to-objective ratio (target <= 0.5)"),
        ("c_gb_per_s", "(c) our GB/s over X"),
        ("c_ratio", "(c) our bytes/s / X.sum() bytes/s"),
        ("peak_mb", "peak traced memory in our fit (MB)"),
        ("x_mb", "size of X (MB)"),
    ]
    for key, label in labels:
        print(f"{label:<44}" + "".join(f"{rows[n][key]:>12.3g}" for n in rows))


if __name__ == "__main__":
    main()
