"""Times scikit-learn on the data assort's benchmark wrote, for a side-by-side
ratio. Called by `cargo bench --bench engine_vs_reference`; prints one JSON
line. Pinned versions: tests/reference/requirements.txt."""
import json
import sys
import time

import numpy as np
import sklearn
from sklearn.cluster import KMeans
from sklearn.metrics import silhouette_score
from threadpoolctl import threadpool_info


def best_of(repeats, fn):
    times = []
    result = None
    for _ in range(repeats):
        t = time.perf_counter()
        result = fn()
        times.append(time.perf_counter() - t)
    return min(times), result


def main():
    path, labels_path = sys.argv[1], sys.argv[2]
    k, restarts, tol, sil_n, repeats = int(sys.argv[3]), int(sys.argv[4]), float(sys.argv[5]), int(sys.argv[6]), int(sys.argv[7])
    x = np.load(path)
    km_time, km = best_of(repeats, lambda: KMeans(n_clusters=k, n_init=restarts, tol=tol, algorithm="lloyd", random_state=0).fit(x))
    # The silhouette is timed on assort's own labels, so its value checks
    # assort's too.
    xs, labels = x[:sil_n], np.load(labels_path)
    sil_time, sil = best_of(repeats, lambda: silhouette_score(xs, labels))
    print(json.dumps({
        "sklearn": sklearn.__version__,
        "kmeans_seconds": km_time,
        "kmeans_inertia": float(km.inertia_),
        "silhouette_seconds": sil_time,
        "silhouette": float(sil),
        "threadpools": [{k: p.get(k) for k in ("internal_api", "num_threads", "architecture")} for p in threadpool_info()],
    }))


if __name__ == "__main__":
    main()
