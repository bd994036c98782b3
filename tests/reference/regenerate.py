"""Regenerates tests/data/reference.json: values from general-purpose
reference libraries (scikit-learn, scipy) that assort's tests compare with.

    pip install -r tests/reference/requirements.txt
    python3 tests/reference/regenerate.py

Data: tests/data/iris.csv and tests/data/wine.csv (origins in
tests/data/ATTRIBUTION.md). The tiny 10-point example is the one given in
../shared/data/reference-values.json.
"""
import json
import pathlib
import sys

import numpy as np
import scipy
import sklearn
from scipy.cluster.hierarchy import cophenet, fcluster, linkage
from scipy.spatial.distance import pdist
from sklearn.cluster import KMeans
from sklearn.metrics import (adjusted_rand_score, calinski_harabasz_score,
                             davies_bouldin_score, silhouette_samples,
                             silhouette_score)

HERE = pathlib.Path(__file__).resolve().parent
DATA = HERE.parent / "data"


def read(name):
    lines = (DATA / name).read_text().strip().split("\n")
    header = lines[0].split(",")
    rows = [l.split(",") for l in lines[1:]]
    x = np.array([[float(v) for v in r[:-1]] for r in rows])
    y = [r[-1] for r in rows]
    return header, x, y


def kmeans_block(x, truth, k, n_init):
    km = KMeans(n_clusters=k, n_init=n_init, random_state=0).fit(x)
    labels = km.labels_
    return {
        "settings": f"KMeans(n_clusters={k}, n_init={n_init}, random_state=0), k-means++, lloyd, max_iter=300, tol=1e-4",
        "best_inertia": float(km.inertia_),
        "cluster_sizes_sorted": sorted(int(c) for c in np.bincount(labels)),
        "silhouette": float(silhouette_score(x, labels)),
        "calinski_harabasz": float(calinski_harabasz_score(x, labels)),
        "davies_bouldin": float(davies_bouldin_score(x, labels)),
        "ari_vs_truth": float(adjusted_rand_score(truth, labels)),
    }


def labelling_block(x, labels):
    return {
        "silhouette": float(silhouette_score(x, labels)),
        "calinski_harabasz": float(calinski_harabasz_score(x, labels)),
        "davies_bouldin": float(davies_bouldin_score(x, labels)),
    }


def tree_block(x, method, metric):
    z = linkage(x, method=method, metric=metric)
    coph, _ = cophenet(z, pdist(x, metric))
    cut = fcluster(z, 3, criterion="maxclust")
    return {
        "call": f"scipy.cluster.hierarchy.linkage(x, method={method!r}, metric={metric!r})",
        "heights": [float(h) for h in z[:, 2]],
        "sizes": [int(s) for s in z[:, 3]],
        "cophenetic_correlation": float(coph),
        "cut3_labels": [int(l) for l in cut],
    }


def main():
    out = {
        "generated_by": "tests/reference/regenerate.py",
        "versions": {
            "python": sys.version.split()[0],
            "numpy": np.__version__,
            "scipy": scipy.__version__,
            "scikit-learn": sklearn.__version__,
        },
    }
    _, iris, species = read("iris.csv")
    out["iris_raw_k3"] = kmeans_block(iris, species, 3, 100)

    _, wine, cultivar = read("wine.csv")
    z = (wine - wine.mean(axis=0)) / wine.std(axis=0, ddof=0)
    out["wine_zscore_k3"] = kmeans_block(z, cultivar, 3, 100)

    # The criteria of the known labellings themselves.
    out["iris_raw_species"] = labelling_block(iris, species)
    out["wine_zscore_cultivar"] = labelling_block(z, cultivar)

    # The tiny example's points and labels are those of the shared reference
    # file (../shared/data/reference-values.json); the values are recomputed.
    shared = HERE.parents[2] / "shared" / "data" / "reference-values.json"
    tiny = json.loads(shared.read_text())["tiny"]
    tiny_points = np.array(tiny["points"])
    truth, pred = tiny["labels_truth"], tiny["labels_pred"]
    out["tiny"] = {
        "points": tiny_points.tolist(),
        "labels_truth": truth,
        "labels_pred": pred,
        "ari_truth_vs_pred": float(adjusted_rand_score(truth, pred)),
        "silhouette_truth": float(silhouette_score(tiny_points, truth)),
        "silhouette_samples_truth": [float(v) for v in silhouette_samples(tiny_points, truth)],
        "calinski_harabasz_truth": float(calinski_harabasz_score(tiny_points, truth)),
        "davies_bouldin_truth": float(davies_bouldin_score(tiny_points, truth)),
    }
    # Agglomerative clustering: scipy's linkage on the raw Iris measurements,
    # every linkage with Euclidean distances, and the matrix-based linkages
    # with the other distances; Ward on z-scored Wine.
    trees = {}
    for method in ["single", "complete", "average", "weighted", "ward", "centroid", "median"]:
        trees[f"iris/{method}/euclidean"] = tree_block(iris, method, "euclidean")
    for method in ["single", "complete", "average", "weighted"]:
        for metric in ["cityblock", "cosine", "correlation"]:
            trees[f"iris/{method}/{metric}"] = tree_block(iris, method, metric)
    trees["wine-zscore/ward/euclidean"] = tree_block(z, "ward", "euclidean")
    out["trees"] = trees

    # Principal components of the raw Iris measurements.
    from sklearn.decomposition import PCA
    pca = PCA(n_components=2).fit(iris)
    out["iris_pca"] = {
        "call": "sklearn.decomposition.PCA(n_components=2).fit(iris)",
        "components": pca.components_.tolist(),
        "explained_variance": pca.explained_variance_.tolist(),
        "first_scores": pca.transform(iris)[:5].tolist(),
    }

    (DATA / "reference.json").write_text(json.dumps(out, indent=2) + "\n")
    print("wrote", DATA / "reference.json")


if __name__ == "__main__":
    main()
