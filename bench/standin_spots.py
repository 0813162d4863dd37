#!/usr/bin/env python3
"""Stand-in for `beadline spots`, only for testing the benchmark harness before the detector
exists: same command line (`PHOTO --format json [--radius MIN..MAX]`) and the
same JSON shape, made with cv2.HoughCircles (HOUGH_GRADIENT_ALT) and a fixed sigma. Its numbers
mean nothing about Beadline.

Use: BEADLINE_SPOTS_CMD="bench/.venv/bin/python bench/standin_spots.py" bench/run_spots.sh --quick
"""
import argparse
import json
import sys

import cv2

if len(sys.argv) > 1 and sys.argv[1] == "--help":
    print("stand-in spots: PHOTO --format json --radius MIN..MAX")
    sys.exit(0)
ap = argparse.ArgumentParser()
ap.add_argument("photo")
ap.add_argument("--format", default="json")
ap.add_argument("--radius", default="5..60")
a = ap.parse_args()
a.min_radius_px, a.max_radius_px = (float(v) for v in a.radius.split(".."))
g = cv2.imread(a.photo, cv2.IMREAD_GRAYSCALE)
c = cv2.HoughCircles(cv2.GaussianBlur(g, (0, 0), 1.0), cv2.HOUGH_GRADIENT_ALT, dp=1.5,
                     minDist=a.min_radius_px, param1=100, param2=0.8,
                     minRadius=int(a.min_radius_px), maxRadius=int(a.max_radius_px + 1))
spots = [] if c is None else [
    {"x_px": float(x), "y_px": float(y), "r_px": float(r), "sigma_px": 0.3, "score": 1.0}
    for x, y, r in c[0]]
json.dump({"spots": spots, "rejected": []}, sys.stdout)
