#!/usr/bin/env python3
"""The script a test engineer would write instead of `liftyard import`.

It is the yardstick of the import benchmark (docs/performance.md): read a raw
CSV (t_s,<channel>,...) with the csv module, apply a linear calibration
value = c0 + c1*reading to every channel, append the calibrated rows to a CSV
and fsync that file every 0.25 s, as a logger that must not lose data would.

    python3 script_import.py RAW.csv OUT.csv CAL.json

CAL.json maps each channel to [c0, c1]. It prints the number of rows read.
"""
import csv
import json
import os
import sys
import time


def main():
    src, dst, cal_path = sys.argv[1:4]
    with open(cal_path) as f:
        cal = json.load(f)
    rows = 0
    with open(src, newline="") as fin, open(dst, "a", newline="") as fout:
        reader = csv.reader(fin)
        writer = csv.writer(fout)
        header = next(reader)
        coef = [cal[name] for name in header[1:]]
        writer.writerow(header)
        last_sync = time.monotonic()
        for row in reader:
            out = [row[0]]
            for cell, (c0, c1) in zip(row[1:], coef):
                out.append(c0 + c1 * float(cell) if cell.strip() else "")
            writer.writerow(out)
            rows += 1
            now = time.monotonic()
            if now - last_sync >= 0.25:
                fout.flush()
                os.fsync(fout.fileno())
                last_sync = now
        fout.flush()
        os.fsync(fout.fileno())
    print(rows)


if __name__ == "__main__":
    main()
