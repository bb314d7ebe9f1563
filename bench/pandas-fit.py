"""The NumPy + pandas baseline of the fit benchmark: read_csv, mean, cov, Cholesky, inverse.
Usage: python3 bench/pandas-fit.py <ledger.csv>. Prints one JSON line (seconds, peak RSS)."""
import json, resource, sys, time
import numpy as np
import pandas as pd

started = time.perf_counter()
frame = pd.read_csv(sys.argv[1])
x = frame[[f"f{i}" for i in range(32)]].to_numpy()
mean = x.mean(axis=0)
cov = np.cov(x, rowvar=False, bias=True)
factor = np.linalg.cholesky(cov)
precision = np.linalg.inv(cov)
seconds = time.perf_counter() - started
usage = resource.getrusage(resource.RUSAGE_SELF)
# CPU time of the whole process from its start (interpreter and imports included, as for the fit's child).
print(json.dumps({"seconds": round(seconds, 3), "cpuSeconds": round(usage.ru_utime + usage.ru_stime, 3), "peakRssMiB": round(usage.ru_maxrss / 1024, 1)}))
