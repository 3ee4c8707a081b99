"""Reference timing for bench/fit.ts: xgboost tree_method='hist' on the same data.

Usage: /usr/bin/python3 bench/fit_xgboost.py <file>
File layout (little-endian): int32 nRows, nFeatures, nTrain; float32 x[nRows * nFeatures]
(row-major); float32 y[nRows]. Rows [0, nTrain) train, the rest validate.
Prints one JSON line per nthread setting: wall and process CPU seconds (all threads) over DMatrix
construction and training (the bench's own trainer is timed over binning and training).
"""
import json
import sys
import time

import numpy as np
import xgboost as xgb

ROUNDS = 300


def main(path: str) -> None:
    raw = np.fromfile(path, dtype=np.uint8)
    n_rows, n_features, n_train = np.frombuffer(raw[:12].tobytes(), dtype="<i4")
    body = np.frombuffer(raw[12:].tobytes(), dtype="<f4")
    x = body[: n_rows * n_features].reshape(n_rows, n_features)
    y = body[n_rows * n_features : n_rows * n_features + n_rows]
    xtr, ytr, xva, yva = x[:n_train], y[:n_train], x[n_train:], y[n_train:]
    for nthread in (1, 2):
        params = {
            "objective": "reg:squarederror",
            "tree_method": "hist",
            "max_depth": 6,
            "eta": 0.1,
            "lambda": 1.0,
            "gamma": 0.0,
            "min_child_weight": 1.0,
            "max_bin": 256,
            "subsample": 1.0,
            "colsample_bytree": 1.0,
            "base_score": float(np.mean(ytr.astype(np.float64))),
            "nthread": nthread,
            "seed": 0,
        }
        t0 = time.perf_counter()
        c0 = time.process_time()
        dtr = xgb.DMatrix(xtr, label=ytr, nthread=nthread)
        dva = xgb.DMatrix(xva, label=yva, nthread=nthread)
        booster = xgb.train(params, dtr, ROUNDS, evals=[(dva, "valid")], verbose_eval=False)
        seconds = time.perf_counter() - t0
        cpu_seconds = time.process_time() - c0
        pred = booster.predict(dva).astype(np.float64)
        rmse = float(np.sqrt(np.mean((pred - yva.astype(np.float64)) ** 2)))
        print(json.dumps({"nthread": nthread, "seconds": seconds, "cpuSeconds": cpu_seconds, "rmse": rmse, "xgboost": xgb.__version__}))


if __name__ == "__main__":
    main(sys.argv[1])
