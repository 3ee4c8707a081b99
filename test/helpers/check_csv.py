"""Reads every CSV file a test wrote from the service's answers, as a user would: Python's csv
module (csv.DictReader) and pandas.read_csv, both with no options. Prints one JSON object per file:
the header each reader found and the row counts, so the test can compare them with the service's.

Usage: /usr/bin/python3 test/helpers/check_csv.py DIR  (Debian's python3-pandas; test/api/csv-readers.test.ts)
"""
import csv
import json
import os
import sys

import pandas

out = {"pandas": pandas.__version__, "files": {}}
folder = sys.argv[1]
for name in sorted(os.listdir(folder)):
    if not name.endswith(".csv"):
        continue
    path = os.path.join(folder, name)
    with open(path, newline="", encoding="utf-8") as f:
        reader = csv.DictReader(f)
        rows = list(reader)
        header = reader.fieldnames
    frame = pandas.read_csv(path)
    caution = None
    if "caution" in frame.columns:
        caution = sorted(set(frame["caution"].astype(str)))
    elif "score" in frame.columns and "note" in frame.columns:
        caution = sorted(set(frame.loc[frame["score"] == "caution", "note"].astype(str)))
    out["files"][name] = {
        "dictreader_header": header,
        "dictreader_rows": len(rows),
        "pandas_columns": [str(c) for c in frame.columns],
        "pandas_rows": int(frame.shape[0]),
        "caution": caution,
    }
print(json.dumps(out))
