"""The notebook assort replaces, as a script: read the CSV with pandas,
compute with scikit-learn or scipy, print one line. Timed as a whole
process by run.py, side by side with `assort run` on the same file.

  reference.py sweep FILE KMIN KMAX RESTARTS      k-means per k, sampled silhouette (12,000), C-H, D-B
  reference.py kmeans FILE K                      one k-means fit, sampled silhouette (12,000), C-H, D-B
  reference.py exact FILE K                       one k-means fit, exact silhouette
  reference.py tree FILE LINKAGE K                scipy linkage, cut into K
"""
import sys

import numpy as np
import pandas as pd


def features(path):
    frame = pd.read_csv(path)
    return frame.drop(columns=["id"]).to_numpy(dtype=float)


def judge(x, labels, sample):
    from sklearn.metrics import calinski_harabasz_score, davies_bouldin_score, silhouette_score

    s = silhouette_score(x, labels, sample_size=sample, random_state=0) if sample else silhouette_score(x, labels)
    return s, calinski_harabasz_score(x, labels), davies_bouldin_score(x, labels)


def main():
    what, path = sys.argv[1], sys.argv[2]
    x = features(path)
    if what in ("sweep", "kmeans", "exact"):
        from sklearn.cluster import KMeans

        if what == "sweep":
            ks, restarts = range(int(sys.argv[3]), int(sys.argv[4]) + 1), int(sys.argv[5])
        else:
            ks, restarts = [int(sys.argv[3])], 1
        best = None
        for k in ks:
            km = KMeans(n_clusters=k, n_init=restarts, random_state=0).fit(x)
            s, ch, db = judge(x, km.labels_, None if what == "exact" else 12_000)
            if best is None or s > best[1]:
                best = (k, s)
            print(f"k={k} inertia={km.inertia_:.3f} silhouette={s:.4f} ch={ch:.2f} db={db:.4f}")
        print(f"chosen k={best[0]}")
    elif what == "tree":
        from scipy.cluster.hierarchy import fcluster, linkage

        z = linkage(x, method=sys.argv[3])
        labels = fcluster(z, t=int(sys.argv[4]), criterion="maxclust")
        print(f"top merge {z[-1, 2]:.4f}, {len(np.unique(labels))} segments")
    else:
        sys.exit(f"unknown case {what}")


if __name__ == "__main__":
    main()
