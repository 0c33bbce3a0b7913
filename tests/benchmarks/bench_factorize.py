"""Speed of JointNMF against scikit-learn's NMF(solver="mu") and against a two-product floor.

Usage: python tests/benchmarks/bench_factorize.py [--sizes 2000 10000] [--features 2000]
       [--sk-iter 500] [--threads 1] [--repeats 3]

Both sides run with the same BLAS thread count (default 1, as in the sweep's workers: on a
shared machine two BLAS threads per process were measured slower than one). Timings are the
fastest of --repeats runs; on a busy machine compare the ratios, not the seconds.

Invented data: 3 modalities x --features features with 6 planted patient programmes, a
20-nearest-neighbour patient graph (found on a 30-dimensional random projection, so that
building it does not dominate at N = 10,000), rank 6.

Rows printed per cohort size:
  (a) time-to-error ratio: seconds for our fit (defaults, so float32; lambda = 0, modality
      weights 1: the same objective) to reach the error scikit-learn (float64) reaches after
      --sk-iter iterations / the seconds scikit-learn takes for those iterations (target <= 0.12)
  (b) seconds per outer iteration, ours (with the graph, set-up excluded) / the 2-GEMM floor:
      the fastest X H^T (either operand order) plus W^T X on the concatenated data, in the
      same dtype; float64 and float32 (target <= 1.5)
  (c) seconds per outer iteration, ours (float64, graph) / scikit-learn's
  (d) iterations of a fit with the graph at the default tolerance (3 restarts, all counted)
      and how many of the restarts stopped at max_iter (target 0)
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

RANK, N_VIEWS, N_NEIGHBOURS = 6, 3, 20
SHORT, LONG = 10, 50  # per-iteration cost = (time of a LONG-iteration fit - a SHORT one) / (LONG - SHORT)
GRAPH_WEIGHT = 1.0


def make_views(n_patients: int, n_features: int = 2000, seed: int = 0) -> list[np.ndarray]:
    rng = np.random.default_rng(seed)
    programmes = np.eye(RANK)[rng.integers(0, RANK, n_patients)] + 0.2 * rng.random((n_patients, RANK))
    return [programmes @ rng.gamma(0.5, 1.0, (RANK, n_features)) + 0.5 * rng.random((n_patients, n_features))
            for _ in range(N_VIEWS)]


def make_graph(views: list[np.ndarray], seed: int = 0):
    rng = np.random.default_rng(seed)
    projected = sum(v @ rng.standard_normal((v.shape[1], 30)) for v in views)
    graph = kneighbors_graph(projected, N_NEIGHBOURS, include_self=False)
    return ((graph + graph.T) / 2).tocsr()


def fastest(call, repeats: int) -> float:
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        call()
        times.append(time.perf_counter() - start)
    return min(times)


def quiet_fit(model, views, graph, W0=None, H0=None):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        return model.fit(views, graph, W_init=W0, H_init=H0)


def gemm_floor(X: np.ndarray, W: np.ndarray, H: np.ndarray, repeats: int) -> float:
    """Seconds of the two products an outer iteration cannot avoid, each in its faster form."""
    plain = fastest(lambda: X @ H.T, 5 * repeats)
    transposed = fastest(lambda: (H @ X.T).T, 5 * repeats)
    return min(plain, transposed) + fastest(lambda: W.T @ X, 5 * repeats)


def per_iteration(views, graph, W0, H0, dtype: str, repeats: int) -> float:
    def fit(count):
        model = JointNMF(RANK, graph_weight=GRAPH_WEIGHT, max_iter=count, tol=0, dtype=dtype)
        return lambda: quiet_fit(model, views, graph, W0, H0)

    return (fastest(fit(LONG), repeats) - fastest(fit(SHORT), repeats)) / (LONG - SHORT)


def bench(n_patients: int, n_features: int, sk_iter: int, repeats: int) -> dict[str, float]:
    views = make_views(n_patients, n_features)
    graph = make_graph(views)
    X = np.hstack(views)
    unit = [1.0] * N_VIEWS
    W0, H0 = initial_factors(prepare_views(views, weights=unit).blocks, n_patients, RANK, "nndsvda",
                             np.random.default_rng(0))

    sk = NMF(RANK, init="custom", solver="mu", beta_loss="frobenius", max_iter=sk_iter, tol=0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        start = time.perf_counter()
        W_sk = sk.fit_transform(X, W=W0.copy(), H=np.hstack(H0))
        sk_time = time.perf_counter() - start
    sk_error = float(np.sum((X - W_sk @ sk.components_) ** 2))

    plain = JointNMF(RANK, graph_weight=0.0, modality_weights=unit, max_iter=sk_iter, tol=0)
    trace = quiet_fit(plain, views, None, W0, H0).objective_
    reached = np.flatnonzero(trace <= sk_error)
    if reached.size:
        catch_up = JointNMF(RANK, graph_weight=0.0, modality_weights=unit, max_iter=int(reached[0]) + 1, tol=0)
        catch_up_time = fastest(lambda: quiet_fit(catch_up, views, None, W0, H0), repeats)
    else:
        catch_up_time = float("nan")

    rows = {"sk_s_per_iter": sk_time / sk_iter}
    for dtype in ("float64", "float32"):
        data = [v.astype(dtype) for v in views]
        Xd, Wd, Hd = X.astype(dtype), W0.astype(dtype), np.hstack(H0).astype(dtype)
        rows[f"floor_{dtype}"] = gemm_floor(Xd, Wd, Hd, repeats)
        rows[f"ours_{dtype}"] = per_iteration(data, graph, W0, H0, dtype, repeats)
        rows[f"b_{dtype}"] = rows[f"ours_{dtype}"] / rows[f"floor_{dtype}"]

    restarts = []
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", ConvergenceWarning)
        for seed in range(3):
            model = JointNMF(RANK, graph_weight=GRAPH_WEIGHT, random_state=seed,
                             init="nndsvda" if seed == 0 else "random").fit(views, graph)
            restarts.append(model.n_iter_)
    tracemalloc.start()
    quiet_fit(JointNMF(RANK, graph_weight=GRAPH_WEIGHT, max_iter=5), views, graph, W0, H0)  # peak is in the first iterations
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    rows.update(
        a_iterations=float(reached[0] + 1) if reached.size else float("nan"),
        a_ratio=catch_up_time / sk_time,
        c_ratio=rows["ours_float64"] / rows["sk_s_per_iter"],
        d_iterations=float(np.mean(restarts)),
        d_max_iter=float(len(caught)),
        peak_mb=peak / 2**20,
        x_mb=X.nbytes / 2**20,
    )
    return rows


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--sizes", type=int, nargs="+", default=[2000, 10000])
    parser.add_argument("--features", type=int, default=2000, help="features per modality (3 modalities)")
    parser.add_argument("--sk-iter", type=int, default=500)
    parser.add_argument("--threads", type=int, default=1)
    parser.add_argument("--repeats", type=int, default=3)
    args = parser.parse_args()
    with threadpool_limits(args.threads, user_api="blas"):
        rows = {n: bench(n, args.features, args.sk_iter, args.repeats) for n in args.sizes}
    print(f"{'measure':<52}" + "".join(f"{f'N={n}':>12}" for n in rows))
    labels = [
        ("a_ratio", "(a) time-to-error ratio vs scikit-learn (<= 0.12)"),
        ("a_iterations", "(a) our iterations to scikit-learn's error"),
        ("b_float64", "(b) s/iteration / 2-GEMM floor, float64 (<= 1.5)"),
        ("b_float32", "(b) s/iteration / 2-GEMM floor, float32 (<= 1.5)"),
        ("ours_float64", "    ours s / outer iteration (float64, graph)"),
        ("floor_float64", "    2-GEMM floor s (float64)"),
        ("ours_float32", "    ours s / outer iteration (float32, graph)"),
        ("floor_float32", "    2-GEMM floor s (float32)"),
        ("c_ratio", "(c) s/iteration ours (graph) / scikit-learn"),
        ("d_iterations", "(d) iterations per fit, graph, default tol"),
        ("d_max_iter", "(d) fits of 3 stopped at max_iter (target 0)"),
        ("peak_mb", "peak traced memory in our fit (MB)"),
        ("x_mb", "size of X (MB)"),
    ]
    for key, label in labels:
        print(f"{label:<52}" + "".join(f"{rows[n][key]:>12.3g}" for n in rows))


if __name__ == "__main__":
    main()
