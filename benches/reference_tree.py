"""Times scipy's linkage on the data assort's tree benchmark wrote, for a
side-by-side ratio. Called by `cargo bench --bench tree_vs_reference`;
prints one JSON line. Pinned versions: tests/reference/requirements.txt."""
import json
import sys
import time

import numpy as np
import scipy
from scipy.cluster.hierarchy import linkage


def main():
    x = np.load(sys.argv[1])
    out = {"scipy": scipy.__version__}
    for method in sys.argv[2].split(","):
        t = time.perf_counter()
        z = linkage(x, method)
        out[method] = {"seconds": time.perf_counter() - t, "top": float(z[-1, 2])}
    print(json.dumps(out))


if __name__ == "__main__":
    main()
