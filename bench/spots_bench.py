#!/usr/bin/env python3
"""Spots benchmark: `beadline spots` against reference circle detectors on rendered strobe photos.

Steps (all output under --out, default bench/out):
  1. write the scene suite (bench/suite.py) and render every scene with `beadline render`
     (photo + exact truth); a photo is rendered again only when its scene text changed;
  2. tune each reference detector on the ONE calibration photo by a small grid search (maximise
     F1, then minimise the centre RMS error), then freeze its parameters;
  3. run Beadline and the frozen references on every photo; every method gets the same radius
     range, the photo's truth radius -20 % .. +20 %;
  4. match detections to the in-frame truth flashes (Hungarian assignment, a pair counts only
     within 0.5 truth radius; a detection on a flash whose centre is outside the frame is neither
     a hit nor a false positive), and report recall, precision and centre RMS error for isolated
     images and for images overlapping a neighbour (centre distance < r_i + r_j to any other
     flash), Beadline's error / sigma calibration and wall times;
  5. speed: decode, `beadline spots` and cv2.HoughCircles on 1.5, 12 and 24 MP JPEGs and on
     10, 40 and 160 flashes; peak memory of `beadline spots` from GNU time -v;
  6. write the report: bench/RESULTS.md, or bench/RESULTS-references-only.md when `beadline
     spots` is not available (Beadline is then skipped, everything else still runs).

References: OpenCV cv2.HoughCircles with HOUGH_GRADIENT and with HOUGH_GRADIENT_ALT, and
scikit-image transform.hough_circle + hough_circle_peaks on Canny edges.
"""
import argparse
import datetime
import hashlib
import itertools
import json
import os
import pathlib
import pickle
import platform
import re
import shlex
import shutil
import subprocess
import sys
import tempfile
import time
import tomllib

import cv2
import numpy as np
import scipy
import skimage
from scipy.optimize import linear_sum_assignment
from skimage import feature, transform

HERE = pathlib.Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))
import suite  # noqa: E402

RADIUS_MARGIN = 0.20   # radius range given to every method: truth radius -20 % .. +20 %
MATCH_FRACTION = 0.5   # a detection matches a truth image within 0.5 truth radius
SCOPE_NN_R = 0.8       # the target covers images whose nearest neighbour is >= 0.8 radius away
# Crowded images (issue 17): recall and centre RMS by the nearest neighbour's distance in radii.
CROWDED_BINS = ((0.4, 0.8), (0.25, 0.4))

# Default flags that pass the radius range to `beadline spots`; {rmin} {rmax} are filled in.
# Override with BEADLINE_SPOTS_RADIUS_ARGS (empty string: pass no radius range).
DEFAULT_RADIUS_ARGS = "--radius {rmin:.2f}..{rmax:.2f}"
# Not a detector: the least-squares disc fit started at the truth (faint class only).
YARDSTICK = "disc fit from the truth"


# ----------------------------------------------------------------------------------------------
# Reference detectors. Each takes a grey uint8 image, the radius range and its parameters and
# returns an (N, 3) array of x_px, y_px, r_px.

def _blur(gray, sigma):
    return cv2.GaussianBlur(gray, (0, 0), sigma) if sigma > 0 else gray


def hough_gradient(gray, rmin, rmax, p):
    """cv2.HoughCircles, HOUGH_GRADIENT. param2 (accumulator votes) is given as a fraction of the
    smallest circumference 2 pi rmin, so one frozen value means the same for every ball size."""
    votes = max(1.0, p["votes_per_circumference"] * 2.0 * np.pi * rmin)
    c = cv2.HoughCircles(_blur(gray, p["blur_sigma"]), cv2.HOUGH_GRADIENT, dp=p["dp"],
                         minDist=max(1.0, p["min_dist_r"] * rmin), param1=p["canny_high"],
                         param2=votes, minRadius=int(np.floor(rmin)),
                         maxRadius=int(np.ceil(rmax)))
    return np.zeros((0, 3)) if c is None else c[0].astype(float)


def hough_gradient_alt(gray, rmin, rmax, p):
    """cv2.HoughCircles, HOUGH_GRADIENT_ALT (param2 = circle 'perfectness' 0..1)."""
    c = cv2.HoughCircles(_blur(gray, p["blur_sigma"]), cv2.HOUGH_GRADIENT_ALT, dp=p["dp"],
                         minDist=max(1.0, p["min_dist_r"] * rmin), param1=p["canny_high"],
                         param2=p["perfectness"], minRadius=int(np.floor(rmin)),
                         maxRadius=int(np.ceil(rmax)))
    return np.zeros((0, 3)) if c is None else c[0].astype(float)


def sk_radii(rmin, rmax):
    return np.arange(int(np.floor(rmin)), int(np.ceil(rmax)) + 1)


def sk_accumulator(gray, rmin, rmax, sigma):
    edges = feature.canny(gray, sigma=sigma)
    radii = sk_radii(rmin, rmax)
    return transform.hough_circle(edges, radii, normalize=True), radii


def sk_peaks(acc, radii, rmin, p):
    d = max(1, int(round(p["min_dist_r"] * rmin)))
    _, x, y, r = transform.hough_circle_peaks(acc, radii, min_xdistance=d, min_ydistance=d,
                                              threshold=p["threshold"])
    return np.column_stack([x, y, r]).astype(float) if len(x) else np.zeros((0, 3))


def skimage_hough(gray, rmin, rmax, p):
    """skimage.feature.canny + transform.hough_circle + hough_circle_peaks (integer centres)."""
    acc, radii = sk_accumulator(gray, rmin, rmax, p["canny_sigma"])
    return sk_peaks(acc, radii, rmin, p)


REFERENCES = {
    "cv2 HOUGH_GRADIENT": hough_gradient,
    "cv2 HOUGH_GRADIENT_ALT": hough_gradient_alt,
    "skimage hough_circle": skimage_hough,
}

GRIDS = {
    "cv2 HOUGH_GRADIENT": dict(blur_sigma=[0.0, 1.0, 2.0], dp=[1.0, 1.5, 2.0],
                               canny_high=[50, 100, 150, 200, 300],
                               votes_per_circumference=[0.05, 0.1, 0.15, 0.2, 0.3, 0.4, 0.5, 0.6, 0.8],
                               min_dist_r=[0.5]),
    "cv2 HOUGH_GRADIENT_ALT": dict(blur_sigma=[0.0, 1.0, 2.0], dp=[1.0, 1.5],
                                   canny_high=[30, 50, 100, 200, 300],
                                   perfectness=[0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.85, 0.9, 0.95],
                                   min_dist_r=[0.5]),
    "skimage hough_circle": dict(canny_sigma=[1.0, 2.0, 3.0],
                                 threshold=[0.2, 0.3, 0.4, 0.5, 0.6, 0.7],
                                 min_dist_r=[0.5, 1.0, 1.5]),
}


# min_dist_r 1.0 and 1.5 were in the cv2 grids of the first full runs and never won (the slow
# start puts centres closer than one radius); they were dropped to keep the suite under 10 min.


def grid(spec):
    keys = list(spec)
    for values in itertools.product(*(spec[k] for k in keys)):
        yield dict(zip(keys, values))


# ----------------------------------------------------------------------------------------------
# Truth and matching

class Truth:
    def __init__(self, path):
        t = json.loads(pathlib.Path(path).read_text())
        self.doc = t
        f = t["flashes"]
        xyr = np.array([[q["x_px"], q["y_px"], q["r_px"]] for q in f], float).reshape(-1, 3)
        inside = np.array([bool(q["in_frame"]) for q in f])
        # Overlap: any other flash image (in frame or not) closer than r_i + r_j.
        d = np.hypot(xyr[:, None, 0] - xyr[None, :, 0], xyr[:, None, 1] - xyr[None, :, 1])
        np.fill_diagonal(d, np.inf)
        overl = (d < xyr[:, None, 2] + xyr[None, :, 2]).any(axis=1) if len(f) > 1 \
            else np.zeros(len(f), bool)
        self.flashes = xyr[inside]
        self.flash_n = np.array([int(q["n"]) for q in f], int)[inside]
        self.overlap = overl[inside]
        # In the target's scope: no other flash's centre nearer than 0.8 radius (images nearer
        # than that, at the very slow start, are nearly one image).
        near = (d < SCOPE_NN_R * xyr[:, None, 2]).any(axis=1) if len(f) > 1 \
            else np.zeros(len(f), bool)
        self.scope = ~near[inside]
        # Nearest other flash's centre, in this image's radii (any flash, in frame or not).
        nn = d.min(axis=1) / xyr[:, 2] if len(f) > 1 else np.full(len(f), np.inf)
        self.nn_r = nn[inside]
        self.outside = xyr[~inside]
        self.distractors = np.array([[q["x_px"], q["y_px"], q["r_px"]]
                                     for q in t.get("distractors", [])], float).reshape(-1, 3)
        self.reflections = np.array([[q["x_px"], q["y_px"], q["r_px"]]
                                     for q in t.get("reflections", [])], float).reshape(-1, 3)
        r = self.flashes[:, 2]
        self.rmin = float(r.min()) * (1.0 - RADIUS_MARGIN)
        self.rmax = float(r.max()) * (1.0 + RADIUS_MARGIN)


def _near(det, objs):
    if len(objs) == 0 or len(det) == 0:
        return np.zeros(len(det), bool)
    d = np.hypot(det[:, None, 0] - objs[None, :, 0], det[:, None, 1] - objs[None, :, 1])
    return (d < MATCH_FRACTION * objs[None, :, 2]).any(axis=1)


def match(truth, det, sigma=None):
    """Match detections to in-frame truth. Returns a dict of per-image results."""
    det = np.asarray(det, float).reshape(-1, 3)
    T = truth.flashes
    tp_t, tp_d = np.array([], int), np.array([], int)
    if len(T) and len(det):
        d = np.hypot(T[:, None, 0] - det[None, :, 0], T[:, None, 1] - det[None, :, 1])
        ok = d < MATCH_FRACTION * T[:, 2:3]
        cost = np.where(ok, d, 1e6)
        ri, ci = linear_sum_assignment(cost)
        keep = ok[ri, ci]
        tp_t, tp_d = ri[keep], ci[keep]
    unmatched = np.ones(len(det), bool)
    unmatched[tp_d] = False
    rest = det[unmatched]
    neutral = _near(rest, truth.outside)
    fp = rest[~neutral]
    on_distractor = _near(fp, truth.distractors)
    on_reflection = _near(fp, truth.reflections) & ~on_distractor
    err = det[tp_d, :2] - T[tp_t, :2]
    res = {
        "n_truth": len(T), "n_truth_overlap": int(truth.overlap.sum()),
        "tp": len(tp_t), "tp_overlap": int(truth.overlap[tp_t].sum()),
        "n_truth_scope": int(truth.scope.sum()), "tp_scope": int(truth.scope[tp_t].sum()),
        "fp": len(fp), "fp_distractor": int(on_distractor.sum()),
        "fp_reflection": int(on_reflection.sum()),
        "err": err, "overlap": truth.overlap[tp_t], "r_err": det[tp_d, 2] - T[tp_t, 2],
        "truth_idx": tp_t,
    }
    for lo, hi in CROWDED_BINS:
        inbin = (truth.nn_r >= lo) & (truth.nn_r < hi)
        res[f"n_truth_{lo}"] = int(inbin.sum())
        res[f"tp_{lo}"] = int(inbin[tp_t].sum())
        res[f"in_{lo}"] = inbin[tp_t]
    res["tp_scope_first_fp"] = scope_hits_before_first_fp(truth, det)
    if sigma is not None:
        res["sigma"] = np.asarray(sigma, float)[tp_d]
    return res


def scope_hits_before_first_fp(truth, det):
    """In-scope truth images a detector finds before its first false positive, taking its
    detections in the order it returns them (OpenCV's HoughCircles and scikit-image's
    hough_circle_peaks return the strongest accumulator peak first). This is the recall the
    detector would have at precision 1 with an oracle threshold chosen per photo from the truth:
    generous to it, and blind to how many false circles it returns at its frozen setting."""
    det = np.asarray(det, float).reshape(-1, 3)
    T = truth.flashes
    used = np.zeros(len(T), bool)
    hits = 0
    for x, y, r in det:
        d = np.hypot(T[:, 0] - x, T[:, 1] - y) if len(T) else np.zeros(0)
        ok = (d < MATCH_FRACTION * T[:, 2]) & ~used if len(T) else np.zeros(0, bool)
        if ok.any():
            j = int(np.argmin(np.where(ok, d, np.inf)))
            used[j] = True
            hits += int(truth.scope[j])
        elif not _near(np.array([[x, y, r]]), truth.outside)[0]:
            break
    return hits


def f1_rms(res):
    tp, fn, fp = res["tp"], res["n_truth"] - res["tp"], res["fp"]
    f1 = 2 * tp / (2 * tp + fn + fp) if tp else 0.0
    rms = float(np.sqrt((res["err"] ** 2).sum(axis=1).mean())) if tp else float("inf")
    return f1, rms


# ----------------------------------------------------------------------------------------------
# Beadline

class Beadline:
    def __init__(self, binary, spots_cmd=None):
        self.binary = binary
        self.spots_cmd = shlex.split(spots_cmd) if spots_cmd else [binary, "spots"]
        self.available, self.reason = self._probe()
        self.radius_args = os.environ.get("BEADLINE_SPOTS_RADIUS_ARGS", DEFAULT_RADIUS_ARGS)
        self.radius_note = "radius range passed with `%s`" % self.radius_args
        if self.available and self.radius_args:
            flag = self.radius_args.split()[0]
            if flag not in self.help_text:
                self.radius_note = ("`%s` is not in `beadline spots --help`: Beadline ran "
                                    "WITHOUT the radius range the references got" % flag)
                self.radius_args = ""
        self.gnu_time = os.path.exists("/usr/bin/time") and subprocess.run(
            ["/usr/bin/time", "-v", "true"], capture_output=True).returncode == 0

    def _probe(self):
        self.help_text = ""
        try:
            p = subprocess.run(self.spots_cmd + ["--help"], capture_output=True, text=True,
                               timeout=60)
        except (OSError, subprocess.TimeoutExpired) as e:
            return False, f"cannot run {' '.join(self.spots_cmd)}: {e}"
        if p.returncode != 0:
            msg = (p.stderr or p.stdout).strip().splitlines()
            return False, f"`{' '.join(self.spots_cmd)} --help` failed: " + \
                (msg[0] if msg else f"exit {p.returncode}")
        self.help_text = p.stdout
        return True, ""

    def version(self):
        try:
            return subprocess.run([self.binary, "--version"], capture_output=True, text=True,
                                  timeout=30).stdout.strip()
        except OSError:
            return "unknown"

    def spots(self, photo, rmin=None, rmax=None, measure_memory=False, plate=None):
        """Run `beadline spots PHOTO --format json`. Returns (xyr, sigma, score, wall_s, rss_kb)."""
        cmd = self.spots_cmd + [str(photo), "--format", "json"]
        if plate is not None:
            cmd += ["--plate", str(plate)]
        if rmin is not None and self.radius_args:
            cmd += shlex.split(self.radius_args.format(rmin=rmin, rmax=rmax))
        rss_kb = None
        with tempfile.NamedTemporaryFile(suffix=".time") as tf:
            if measure_memory and self.gnu_time:
                cmd = ["/usr/bin/time", "-v", "-o", tf.name] + cmd
            t0 = time.perf_counter()
            p = subprocess.run(cmd, capture_output=True, text=True)
            wall = time.perf_counter() - t0
            if measure_memory and self.gnu_time:
                m = re.search(r"Maximum resident set size \(kbytes\): (\d+)",
                              pathlib.Path(tf.name).read_text())
                rss_kb = int(m.group(1)) if m else None
        if p.returncode != 0:
            raise RuntimeError(f"{' '.join(cmd)}: exit {p.returncode}: {p.stderr.strip()}")
        if measure_memory and not self.gnu_time:
            import resource
            rss_kb = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss  # max over children
        doc = json.loads(p.stdout)
        self.last_doc = doc
        s = doc["spots"]
        xyr = np.array([[q["x_px"], q["y_px"], q["r_px"]] for q in s], float).reshape(-1, 3)
        # Absolute 1-sigma of one centre: its own sigma and the photo's common systematic term.
        sys_px = float(doc.get("systematic_px", 0.0) or 0.0)
        sigma = np.hypot(np.array([q.get("sigma_px", np.nan) for q in s], float), sys_px)
        score = np.array([q.get("score", np.nan) for q in s], float)
        return xyr, sigma, score, wall, rss_kb


    def measure_path(self, photo, truth_doc, plate=None):
        """Run `beadline measure PHOTO --rate R --ball-diameter D --format json` with the rate
        and the ball's diameter of the truth (what a user knows). Returns the path's (x, y) in
        pixels and their flash numbers `n`, empty when measure refused the photo."""
        cmd = [self.binary, "measure", str(photo), "--rate", repr(truth_doc["rate_hz"]),
               "--ball-diameter", repr(2.0 * truth_doc["ball_radius_m"]), "--format", "json"]
        if plate is not None:
            cmd += ["--plate", str(plate)]
        plane = plane_file(photo, truth_doc)
        if plane is not None:
            cmd += ["--plane", str(plane)]
        p = subprocess.run(cmd, capture_output=True, text=True)
        try:
            doc = json.loads(p.stdout)
        except json.JSONDecodeError:
            return np.zeros((0, 2)), np.zeros(0, int)
        path = doc.get("path", [])
        xy = np.array([[q["x_px"], q["y_px"]] for q in path], float).reshape(-1, 2)
        return xy, np.array([q["n"] for q in path], int)


def plane_file(photo, truth_doc):
    """For a tilted camera, the plane file a user would give: six ball centres of the truth
    spread over the path, pixels beside metres in the plane of motion (what a user measures on a
    board held in that plane), with the lens's distortion of the scene. None for a camera square to the plane (no tilt in its scene)."""
    stamp = photo.with_suffix(".scene")
    if not stamp.exists():
        return None
    text = "\n".join(l for l in stamp.read_text().splitlines() if l.strip() != "plate")
    camera = tomllib.loads(text).get("camera", {})
    tilt = camera.get("tilt_deg", 0.0)
    flashes = [f for f in truth_doc["flashes"] if f.get("in_frame")]
    if tilt == 0.0 or len(flashes) < 6:
        return None
    order = sorted(range(len(flashes)), key=lambda i: flashes[i]["t_s"])
    picks = [flashes[order[round(k * (len(order) - 1) / 5)]] for k in range(6)]
    lines = ["# plane points: six truth ball centres of the photo (bench/spots_bench.py), and",
             "# the lens's radial distortion as the scene has it (a user's lens calibration)",
             f"k1 = {camera.get('k1', 0.0)!r}", f"k2 = {camera.get('k2', 0.0)!r}",
             f"focal_px = {camera.get('focal_px', camera.get('width_px', 1))!r}"]
    for f in picks:
        lines += ["[[points]]", f"x_px = {f['x_px']!r}", f"y_px = {f['y_px']!r}",
                  f"x_m = {f['x_m']!r}", f"y_m = {f['y_m']!r}"]
    out = photo.with_name(photo.stem + ".plane.toml")
    out.write_text("\n".join(lines) + "\n")
    return out


# ----------------------------------------------------------------------------------------------
# Rendering

def plate_path(photo):
    return photo.with_name(photo.stem + ".plate" + photo.suffix)


def render_all(binary, scene_dir, photo_dir, entries, log):
    """Render each scene unless its photo and truth (and plate) exist for the same scene text."""
    photo_dir.mkdir(parents=True, exist_ok=True)
    out = {}
    for name, ext, plate in entries:
        scene = scene_dir / f"{name}.toml"
        photo, truth = photo_dir / f"{name}.{ext}", photo_dir / f"{name}.json"
        stamp = photo_dir / f"{name}.scene"
        text = scene.read_text() + ("plate\n" if plate else "")
        if not (photo.exists() and truth.exists() and stamp.exists()
                and stamp.read_text() == text):
            t0 = time.perf_counter()
            extra = ["--plate", str(plate_path(photo))] if plate else []
            subprocess.run([binary, "render", str(scene), "--out", str(photo),
                            "--truth", str(truth)] + extra, check=True)
            stamp.write_text(text)
            log(f"  rendered {photo.name} in {time.perf_counter() - t0:.1f} s")
        out[name] = (photo, truth)
    return out


def read_gray(path, plate=None):
    """The photo in grey; with a clean plate, |photo - plate| stretched to 0..255 (background
    subtraction, the usual way to hand a general-purpose detector a faint object)."""
    g = cv2.imread(str(path), cv2.IMREAD_GRAYSCALE)
    if g is None:
        raise RuntimeError(f"cannot read {path}")
    if plate is None:
        return g
    p = cv2.imread(str(plate), cv2.IMREAD_GRAYSCALE)
    if p is None:
        raise RuntimeError(f"cannot read {plate}")
    d = np.abs(g.astype(np.float32) - p.astype(np.float32))
    top = max(float(np.percentile(d, 99.9)), 1.0)
    return np.clip(d * (255.0 / top), 0, 255).astype(np.uint8)


# ----------------------------------------------------------------------------------------------
# Tuning on the calibration photo

def tune(gray, truth, log):
    rmin, rmax = truth.rmin, truth.rmax
    frozen = {}
    for name, fn in REFERENCES.items():
        t0 = time.perf_counter()
        best, best_key, n = None, None, 0
        if name == "skimage hough_circle":
            spec = dict(GRIDS[name])
            sigmas = spec.pop("canny_sigma")
            for s in sigmas:
                acc, radii = sk_accumulator(gray, rmin, rmax, s)
                for p in grid(spec):
                    p = {"canny_sigma": s, **p}
                    f1, rms = f1_rms(match(truth, sk_peaks(acc, radii, rmin, p)))
                    n += 1
                    key = (round(f1, 3), -rms)
                    if best_key is None or key > best_key:
                        best, best_key = p, key
                del acc
        else:
            for p in grid(GRIDS[name]):
                f1, rms = f1_rms(match(truth, fn(gray, rmin, rmax, p)))
                n += 1
                key = (round(f1, 3), -rms)
                if best_key is None or key > best_key:
                    best, best_key = p, key
        frozen[name] = {"params": best, "f1": best_key[0], "rms": -best_key[1], "n": n,
                        "tune_s": time.perf_counter() - t0}
        log(f"  {name}: {n} settings in {frozen[name]['tune_s']:.0f} s -> {best} "
            f"(F1 {best_key[0]:.3f}, RMS {-best_key[1]:.3f} px)")
    return frozen


# ----------------------------------------------------------------------------------------------
# Yardstick for the faint class: a least-squares disc fit started at the truth

def disc_fit_yardstick(photo, plate, truth):
    """Centre errors (truth index -> (dx, dy) px) of a pixel-intensity disc fit to every isolated
    in-frame image of a photo with a clean plate, started AT THE TRUTH centre and radius.

    The dark-ball image in plate - photo is a uniform disc with a one-pixel edge (the rendered
    radial profile is flat to 0.1 grey level inside and steps within a pixel), so the model
    offset + contrast x coverage, coverage = clip(r - rho + 1/2, 0, 1) (the area of a pixel inside
    a straight edge), is the least-squares (maximum-likelihood under white Gaussian noise) model
    of it. Offset and contrast are solved linearly for each (x, y, r); scipy.optimize.least_squares
    moves (x, y, r) from nine starts within 0.5 px of the truth and the least cost is kept.
    Pixels within 2 px of a neighbouring image are left out. Started near the truth, it shows
    what the pixels allow: no detector can be expected to do much better."""
    from scipy.optimize import least_squares
    g = cv2.imread(str(photo), cv2.IMREAD_GRAYSCALE).astype(np.float64) / 255.0
    p = cv2.imread(str(plate), cv2.IMREAD_GRAYSCALE).astype(np.float64) / 255.0
    diff = p - g
    h, w = diff.shape
    T = truth.flashes
    allf = np.vstack([T, truth.outside]) if len(truth.outside) else T
    out = {}
    for i, (x, y, r) in enumerate(T):
        if truth.overlap[i]:
            continue
        m = int(np.ceil(r)) + 5
        x0, x1 = int(round(x)) - m, int(round(x)) + m + 1
        y0, y1 = int(round(y)) - m, int(round(y)) + m + 1
        if x0 < 0 or y0 < 0 or x1 > w or y1 > h:
            continue
        yy, xx = np.mgrid[y0:y1, x0:x1]
        keep = np.ones(xx.shape, bool)
        for j, (xo, yo, ro) in enumerate(allf):
            if not (j < len(T) and j == i):
                keep &= np.hypot(xx - xo, yy - yo) > ro + 2.0
        X, Y, d = xx[keep].astype(float), yy[keep].astype(float), diff[y0:y1, x0:x1][keep]

        def resid(q):
            cov = np.clip(q[2] - np.hypot(X - q[0], Y - q[1]) + 0.5, 0.0, 1.0)
            a = np.column_stack([np.ones_like(cov), cov])
            coef, *_ = np.linalg.lstsq(a, d, rcond=None)
            return a @ coef - d

        # The cost has local minima a few tenths of a pixel apart (noise, JPEG blocks): the
        # least of nine fits started on a 3 x 3 grid 0.5 px around the truth.
        fits = [least_squares(resid, [x + dx, y + dy, r], diff_step=1e-3)
                for dx in (-0.5, 0.0, 0.5) for dy in (-0.5, 0.0, 0.5)]
        q = min(fits, key=lambda f: f.cost).x
        out[i] = (q[0] - x, q[1] - y)
    return out


# ----------------------------------------------------------------------------------------------
# Evaluation

def run_reference(name, params, photo, rmin, rmax, plate=None):
    t0 = time.perf_counter()
    gray = read_gray(photo, plate)
    det = REFERENCES[name](gray, rmin, rmax, params)
    return det, time.perf_counter() - t0


def path_match(truth, path):
    """The path's images (centres, flash numbers) against the truth, by the nearest
    neighbour's distance: per bin of CROWDED_BINS and for images 0.8 radius or more from a
    neighbour, (found, total) and the found images' centre errors; the path's images that are no
    ball image (more than half a radius from every in-frame flash not matched to another path
    image); and whether the path's flash numbers are the truth's less one constant."""
    xy, n = path
    T = truth.flashes
    found = np.zeros(len(T), bool)
    err = np.full((len(T), 2), np.nan)
    offsets = set()
    false = 0
    if len(T) and len(xy):
        d = np.hypot(T[:, None, 0] - xy[None, :, 0], T[:, None, 1] - xy[None, :, 1])
        ok = d < MATCH_FRACTION * T[:, 2:3]
        ri, ci = linear_sum_assignment(np.where(ok, d, 1e6))
        keep = ok[ri, ci]
        found[ri[keep]] = True
        err[ri[keep]] = xy[ci[keep]] - T[ri[keep], :2]
        offsets = set((truth.flash_n[ri[keep]] - n[ci[keep]]).tolist())
        near_outside = _near(np.c_[xy, np.ones(len(xy))], truth.outside)
        matched = np.zeros(len(xy), bool)
        matched[ci[keep]] = True
        false = int((~matched & ~near_outside).sum())
    out = {"path_points": len(xy), "path_false": false,
           "path_numbered": len(offsets) <= 1}
    bins = list(CROWDED_BINS) + [(SCOPE_NN_R, np.inf)]
    for lo, hi in bins:
        inbin = (truth.nn_r >= lo) & (truth.nn_r < hi)
        out[f"path_n_{lo}"] = int(inbin.sum())
        out[f"path_tp_{lo}"] = int((inbin & found).sum())
        out[f"path_err_{lo}"] = err[inbin & found]
    return out


def light_counts(doc, truth):
    """(count, truth count) per light group of a `beadline spots` document: the count is None
    when Beadline gave none or marked it uncertain; the truth count is the number of in-frame
    flashes centred within one radius of one of the group's spots."""
    spots = doc["spots"]
    T = truth.flashes
    out = []
    for g in doc.get("light_groups", []):
        xy = np.array([[spots[i]["x_px"], spots[i]["y_px"]] for i in g["spots"]], float)
        if len(T):
            d = np.hypot(T[:, None, 0] - xy[None, :, 0], T[:, None, 1] - xy[None, :, 1])
            expected = int((d < T[:, 2:3]).any(axis=1).sum())
        else:
            expected = 0
        count = None if g.get("uncertain") else g.get("images")
        out.append((count, expected))
    return out


def evaluate(photos, manifest, frozen, beadline, log):
    rows = []  # one per (photo, method)
    for e in manifest["accuracy"]:
        name, cls = e["name"], e["class"]
        photo, tpath = photos[name]
        plate = plate_path(photo) if e.get("plate") else None
        scope = e.get("in_scope", True)
        truth = Truth(tpath)
        for m, f in frozen.items():
            det, wall = run_reference(m, f["params"], photo, truth.rmin, truth.rmax, plate)
            rows.append({"photo": name, "class": cls, "method": m, "wall_s": wall,
                         "in_scope": scope, **match(truth, det)})
        if beadline.available:
            try:
                xyr, sigma, _, wall, _ = beadline.spots(photo, truth.rmin, truth.rmax,
                                                        plate=plate)
                rows.append({"photo": name, "class": cls, "method": "beadline spots",
                             "wall_s": wall, "in_scope": scope, **match(truth, xyr, sigma),
                             "light": light_counts(beadline.last_doc, truth),
                             **path_match(truth, beadline.measure_path(photo, truth.doc,
                                                                       plate))})
            except (RuntimeError, ValueError, KeyError) as err:
                log(f"  beadline spots failed on {name}: {err}")
                rows.append({"photo": name, "class": cls, "method": "beadline spots",
                             "in_scope": scope, "failed": str(err)})
        if plate is not None:
            rows.append({"photo": name, "class": cls, "method": YARDSTICK, "in_scope": scope,
                         "yardstick": disc_fit_yardstick(photo, plate, truth)})
        got = [r for r in rows if r["photo"] == name and "failed" not in r
               and r["method"] != YARDSTICK]
        log(f"  {name}: " + ", ".join(f"{r['method']} {r['tp']}/{r['n_truth']} fp {r['fp']}"
                                      for r in got))
    return rows


def summarise(rows):
    ok = [r for r in rows if "failed" not in r]
    tp = sum(r["tp"] for r in ok)
    nt = sum(r["n_truth"] for r in ok)
    tpo = sum(r["tp_overlap"] for r in ok)
    nto = sum(r["n_truth_overlap"] for r in ok)
    fp = sum(r["fp"] for r in ok)
    err = np.concatenate([r["err"] for r in ok]) if ok else np.zeros((0, 2))
    ov = np.concatenate([r["overlap"] for r in ok]) if ok else np.zeros(0, bool)

    def rms(e):
        return float(np.sqrt((e ** 2).sum(axis=1).mean())) if len(e) else float("nan")

    s = {
        "photos": len(ok), "failed": len(rows) - len(ok),
        "recall": tp / nt if nt else float("nan"),
        "recall_scope": (sum(r["tp_scope"] for r in ok) / sum(r["n_truth_scope"] for r in ok)
                         if sum(r["n_truth_scope"] for r in ok) else float("nan")),
        "recall_scope_first_fp": (sum(r.get("tp_scope_first_fp", 0) for r in ok)
                                  / sum(r["n_truth_scope"] for r in ok)
                                  if sum(r["n_truth_scope"] for r in ok) else float("nan")),
        "recall_iso": (tp - tpo) / (nt - nto) if nt - nto else float("nan"),
        "recall_ovl": tpo / nto if nto else float("nan"),
        "precision": tp / (tp + fp) if tp + fp else float("nan"),
        "tp": tp, "n_truth": nt, "fp": fp,
        "fp_distractor": sum(r["fp_distractor"] for r in ok),
        "fp_reflection": sum(r["fp_reflection"] for r in ok),
        "rms_iso": rms(err[~ov]), "rms_ovl": rms(err[ov]),
        "median_err": float(np.median(np.hypot(err[:, 0], err[:, 1]))) if len(err) else np.nan,
        "p95_err": float(np.percentile(np.hypot(err[:, 0], err[:, 1]), 95)) if len(err)
        else np.nan,
        "n_iso": int((~ov).sum()), "n_ovl": int(ov.sum()),
        "wall_s": sum(r["wall_s"] for r in ok),
    }
    for lo, _ in CROWDED_BINS:
        n = sum(r[f"n_truth_{lo}"] for r in ok)
        s[f"recall_{lo}"] = sum(r[f"tp_{lo}"] for r in ok) / n if n else float("nan")
        s[f"n_{lo}"] = n
        inbin = np.concatenate([r[f"in_{lo}"] for r in ok]) if ok else np.zeros(0, bool)
        s[f"rms_{lo}"] = rms(err[inbin])
    if ok and "path_points" in ok[0]:
        for lo in [b[0] for b in CROWDED_BINS] + [SCOPE_NN_R]:
            n = sum(r[f"path_n_{lo}"] for r in ok)
            s[f"path_recall_{lo}"] = sum(r[f"path_tp_{lo}"] for r in ok) / n if n else np.nan
            e = np.concatenate([r[f"path_err_{lo}"] for r in ok])
            s[f"path_rms_{lo}"] = rms(e)
        s["path_photos"] = len(ok)
        s["path_numbered"] = sum(r["path_numbered"] for r in ok)
        s["path_misnumbered"] = [r["photo"] for r in ok if not r["path_numbered"]]
        points = sum(r["path_points"] for r in ok)
        s["path_points"] = points
        s["path_false"] = sum(r["path_false"] for r in ok)
        s["path_precision"] = 1.0 - s["path_false"] / points if points else np.nan
    groups = [g for r in ok for g in r.get("light", [])]
    if groups:
        counted = [g for g in groups if g[0] is not None]
        s["light_groups"] = len(groups)
        s["light_counted"] = len(counted)
        s["light_exact"] = sum(g[0] == g[1] for g in counted)
        merged = [g for g in counted if g[1] >= 2]
        s["light_merged"] = len(merged)
        s["light_merged_exact"] = sum(g[0] == g[1] for g in merged)
    if ok and "sigma" in ok[0]:
        sig = np.concatenate([r["sigma"] for r in ok])
        good = np.isfinite(sig) & (sig > 0)
        for suffix, sel in (("", good), ("_iso", good & ~ov)):
            e, sg = err[sel], sig[sel]
            if len(e):
                ratio = np.abs(e) / sg[:, None]       # per-axis |error| / sigma
                s["median_abs_err_over_sigma" + suffix] = float(np.median(ratio))
                s["rms_axis_err" + suffix] = float(np.sqrt((e ** 2).mean()))
                s["rms_sigma" + suffix] = float(np.sqrt((sg ** 2).mean()))
    return s


# ----------------------------------------------------------------------------------------------
# Speed section

def median_time(fn, repeat):
    ts = []
    out = None
    for _ in range(repeat):
        t0 = time.perf_counter()
        out = fn()
        ts.append(time.perf_counter() - t0)
    return float(np.median(ts)), out


def speed(photos, manifest, frozen, beadline, repeat, log):
    rows = []
    hg = frozen["cv2 HOUGH_GRADIENT"]["params"]
    alt = frozen["cv2 HOUGH_GRADIENT_ALT"]["params"]
    for e in manifest["speed"]:
        photo, tpath = photos[e["name"]]
        truth = Truth(tpath)
        h, w = truth.doc["height_px"], truth.doc["width_px"]
        row = {"name": e["name"], "kind": e["kind"], "value": e["value"], "w": w, "h": h,
               "n_flashes": len(truth.flashes), "r_px": float(np.median(truth.flashes[:, 2]))}
        row["decode_color_s"], _ = median_time(lambda: cv2.imread(str(photo)), repeat)
        row["decode_s"], gray = median_time(lambda: read_gray(photo), repeat)
        row["hg_s"], det = median_time(
            lambda: hough_gradient(gray, truth.rmin, truth.rmax, hg), repeat)
        row["hg_recall"] = match(truth, det)["tp"] / max(1, len(truth.flashes))
        row["alt_s"], det = median_time(
            lambda: hough_gradient_alt(gray, truth.rmin, truth.rmax, alt), repeat)
        row["alt_recall"] = match(truth, det)["tp"] / max(1, len(truth.flashes))
        if beadline.available:
            try:
                walls, rss = [], []
                for _ in range(repeat):
                    xyr, _, _, wall, kb = beadline.spots(photo, truth.rmin, truth.rmax,
                                                         measure_memory=True)
                    walls.append(wall)
                    rss.append(kb)
                row["beadline_s"] = float(np.median(walls))
                row["beadline_rss_mb"] = max(k for k in rss if k) / 1024 if any(rss) else None
                row["beadline_recall"] = match(truth, xyr)["tp"] / max(1, len(truth.flashes))
            except (RuntimeError, ValueError, KeyError) as err:
                log(f"  beadline spots failed on {e['name']}: {err}")
        log(f"  {e['name']}: decode {row['decode_s']:.3f} s, HOUGH_GRADIENT {row['hg_s']:.3f} s"
            + (f", beadline {row['beadline_s']:.3f} s" if "beadline_s" in row else ""))
        rows.append(row)
    return rows


# ----------------------------------------------------------------------------------------------
# Report

def fmt(v, spec=".3f"):
    if v is None or (isinstance(v, float) and not np.isfinite(v)):
        return "–"
    return format(v, spec)


def machine():
    model = "unknown"
    try:
        for line in pathlib.Path("/proc/cpuinfo").read_text().splitlines():
            if line.startswith("model name"):
                model = line.split(":", 1)[1].strip()
                break
    except OSError:
        pass
    load = ", ".join(f"{x:.1f}" for x in os.getloadavg())
    return f"nproc {os.cpu_count()}, {model}, {platform.system()} {platform.release()}; load " \
           f"average {load} when the report was written (the machine is shared: times are noisy)"


def yardstick_lines(rows):
    """The disc fit started at the truth against Beadline, on the same isolated images."""
    ys = {r["photo"]: r["yardstick"] for r in rows if r["method"] == YARDSTICK}
    bs = {r["photo"]: r for r in rows if r["method"] == "beadline spots" and "failed" not in r}
    if not ys:
        return []
    L = ["", "Information limit: a least-squares fit of a uniform disc (offset + contrast x pixel "
         "coverage, scipy.optimize.least_squares) to plate - photo, the least cost of nine fits "
         "started within 0.5 px of the truth centre, on the isolated images Beadline also found "
         "(`disc_fit_yardstick`). Started from the truth it is an oracle; on the dark ball's flat "
         "disc it is the maximum-likelihood fit under white noise, so its error is about what the "
         "pixels allow.", "",
         "| photo | isolated images | Beadline RMS px | disc fit from the truth RMS px | ratio |",
         "|---|---|---|---|---|"]
    all_b, all_y = [], []
    for name, y in ys.items():
        b = bs.get(name)
        if b is None:
            continue
        be = {int(i): e for i, e, o in zip(b["truth_idx"], b["err"], b["overlap"]) if not o}
        common = sorted(set(be) & set(y))
        if not common:
            continue
        eb = np.array([be[i] for i in common])
        ey = np.array([y[i] for i in common])
        all_b.append(eb)
        all_y.append(ey)
        rb, ry = (float(np.sqrt((e ** 2).sum(axis=1).mean())) for e in (eb, ey))
        L.append(f"| {name} | {len(common)} | {rb:.3f} | {ry:.3f} | {rb / ry:.2f} |")
    if all_b:
        eb, ey = np.concatenate(all_b), np.concatenate(all_y)
        rb, ry = (float(np.sqrt((e ** 2).sum(axis=1).mean())) for e in (eb, ey))
        L.append(f"| all | {len(eb)} | {rb:.3f} | {ry:.3f} | {rb / ry:.2f} |")
    return L


def targets_lines(rows, speed_rows, references):
    """The spots issue's targets beside what this run measured (Beadline, photos in scope)."""
    test = [r for r in rows if r["class"] != "calibration" and r.get("in_scope", True)]
    mine = [r for r in test if r["method"] == "beadline spots"]
    s = summarise(mine)
    lit = summarise([r for r in mine if r["class"] != "dark"])
    dark = summarise([r for r in mine if r["class"] == "dark"])
    refs = {m: summarise([r for r in test if r["method"] == m]) for m in references}
    yes = lambda ok: "yes" if ok else "**no**"
    L = ["## Targets", "",
         "The spots issue's targets against this run (Beadline, the photos within the target's "
         "scope, defined below; the speed rows from the Speed table).", "",
         "| target | measured | met |", "|---|---|---|"]
    L.append(f"| recall >= 0.995 (neighbour >= {SCOPE_NN_R} r) | {fmt(s['recall_scope'], '.4f')} "
             f"| {yes(s['recall_scope'] >= 0.995)} |")
    L.append(f"| precision >= 0.995 | {fmt(s['precision'], '.4f')} | "
             f"{yes(s['precision'] >= 0.995)} |")
    L.append(f"| centre RMS, isolated images <= 0.05 px | {fmt(s['rms_iso'])} "
             f"(bright-ball classes {fmt(lit['rms_iso'])}, dark class {fmt(dark['rms_iso'])}: "
             f"see its information limit below) | {yes(s['rms_iso'] <= 0.05)} |")
    L.append(f"| centre RMS, overlapping images <= 0.15 px | {fmt(s['rms_ovl'])} | "
             f"{yes(s['rms_ovl'] <= 0.15)} |")
    if "rms_sigma" in s and "rms_sigma_iso" in s:
        a, i = s["rms_axis_err"] / s["rms_sigma"], s["rms_axis_err_iso"] / s["rms_sigma_iso"]
        L.append(f"| sigma within a factor 1.5 of the error (RMS per-axis error / RMS sigma) | "
                 f"{a:.2f} all, {i:.2f} isolated | "
                 f"{yes(all(1 / 1.5 <= v <= 1.5 for v in (a, i)))} |")
    L += crowded_target_lines(s, yes)
    for m, r in refs.items():
        better = s["rms_iso"] < r["rms_iso"] and s["rms_ovl"] < r["rms_ovl"]
        L.append(f"| better centre error than {m} (RMS isolated / overlapping) | "
                 f"{fmt(s['rms_iso'])} / {fmt(s['rms_ovl'])} against {fmt(r['rms_iso'])} / "
                 f"{fmt(r['rms_ovl'])} | {yes(better)} |")
        L.append(f"| better recall than {m}: before the first false positive (at the frozen "
                 f"setting, precision) | {fmt(s['recall_scope_first_fp'])} against "
                 f"{fmt(r['recall_scope_first_fp'])} ({fmt(s['recall_scope'])} at "
                 f"{fmt(s['precision'])} against {fmt(r['recall_scope'])} at "
                 f"{fmt(r['precision'])}) | "
                 f"{yes(s['recall_scope_first_fp'] > r['recall_scope_first_fp'])} |")
    big = [r for r in speed_rows if r["kind"] == "size" and "beadline_s" in r]
    if big:
        r = max(big, key=lambda r: r["w"] * r["h"])
        mp = r["w"] * r["h"] / 1e6
        ratio = r["beadline_s"] / r["decode_color_s"]
        L.append(f"| {mp:.0f} MP: wall time <= 1.5 x decoding the JPEG | {ratio:.2f} x | "
                 f"{yes(ratio <= 1.5)} |")
        L.append(f"| {mp:.0f} MP: faster than OpenCV's HoughCircles (decode + HOUGH_GRADIENT) | "
                 f"{r['beadline_s']:.3f} s against {r['decode_color_s'] + r['hg_s']:.3f} s | "
                 f"{yes(r['beadline_s'] < r['decode_color_s'] + r['hg_s'])} |")
        if r.get("beadline_rss_mb"):
            decoded_mb = r["w"] * r["h"] * 3 / 2 ** 20
            L.append(f"| {mp:.0f} MP: peak memory <= 3 x the decoded image ({decoded_mb:.0f} MB "
                     f"RGB) | {r['beadline_rss_mb']:.0f} MB = "
                     f"{r['beadline_rss_mb'] / decoded_mb:.2f} x | "
                     f"{yes(r['beadline_rss_mb'] <= 3 * decoded_mb)} |")
    return L + [""]


def crowded_target_lines(s, yes):
    """The crowding issue's (17) detector targets: recall by the nearest neighbour's distance,
    the centre RMS of images 0.4-0.8 radius from a neighbour, the light counts."""
    (a, b), (c, _) = CROWDED_BINS
    L = [f"| recall >= 0.99, neighbour {a}-{b} r (crowding issue) | {fmt(s[f'recall_{a}'], '.4f')} "
         f"({s[f'n_{a}']} images) | {yes(s[f'recall_{a}'] >= 0.99)} |",
         f"| recall >= 0.95, neighbour {c}-{a} r (crowding issue) | {fmt(s[f'recall_{c}'], '.4f')} "
         f"({s[f'n_{c}']} images) | {yes(s[f'recall_{c}'] >= 0.95)} |",
         f"| centre RMS <= 0.15 px, neighbour {a}-{b} r (crowding issue) | "
         f"{fmt(s[f'rms_{a}'])} | {yes(s[f'rms_{a}'] <= 0.15)} |"]
    if "path_points" in s:
        L += [f"| recall >= 0.99, neighbour {a}-{b} r, the path of `measure` (crowding issue) | "
              f"{fmt(s[f'path_recall_{a}'], '.4f')} | {yes(s[f'path_recall_{a}'] >= 0.99)} |",
              f"| recall >= 0.95, neighbour {c}-{a} r, the path of `measure` (crowding issue) | "
              f"{fmt(s[f'path_recall_{c}'], '.4f')} | {yes(s[f'path_recall_{c}'] >= 0.95)} |",
              f"| centre RMS <= 0.15 px, neighbour {a}-{b} r, the path of `measure` (crowding "
              f"issue) | {fmt(s[f'path_rms_{a}'])} | {yes(s[f'path_rms_{a}'] <= 0.15)} |",
              f"| precision 1.000 on the path of `measure` (crowding issue) | "
              f"{fmt(s['path_precision'], '.4f')} | {yes(s['path_false'] == 0)} |",
              f"| flash numbers the truth's less one constant on every photo (crowding issue) | "
              f"{s['path_numbered']} of {s['path_photos']} | "
              f"{yes(s['path_numbered'] == s['path_photos'])} |"]
    if s.get("light_counted"):
        exact = s["light_exact"] / s["light_counted"]
        L.append(f"| light count exact on >= 98 % of groups (crowding issue) | {exact:.3f} "
                 f"({s['light_exact']} of {s['light_counted']} groups with a count, "
                 f"{s['light_merged_exact']} of {s['light_merged']} holding two or more images; "
                 f"{s['light_groups'] - s['light_counted']} of {s['light_groups']} groups "
                 f"without a count or uncertain) | {yes(exact >= 0.98)} |")
    return L


def report(path, rows, frozen, calib_name, speed_rows, beadline, versions, elapsed_s, cmdline):
    methods = list(frozen) + (["beadline spots"] if beadline.available else [])
    classes = []
    for r in rows:
        if r["class"] not in classes:
            classes.append(r["class"])
    L = []
    if beadline.available:
        L.append("# Spots benchmark: results")
    else:
        L.append("# Spots benchmark: REFERENCES ONLY (Beadline not measured)")
        L.append("")
        L.append(f"**`beadline spots` was not available** ({beadline.reason}), so this file holds "
                 "the reference detectors only. It is not the final comparison: rerun "
                 "`bench/run_spots.sh` once `beadline spots` exists to get `bench/RESULTS.md`.")
    L += ["", f"Date: {datetime.datetime.now(datetime.timezone.utc):%Y-%m-%d %H:%M UTC}  ",
          f"Machine: {machine()}  ",
          "Versions: " + ", ".join(f"{k} {v}" for k, v in versions.items()) + "  ",
          f"Command: `{cmdline}` ({elapsed_s / 60:.1f} min in all)", ""]
    L += targets_lines(rows, speed_rows, list(frozen)) if beadline.available else []
    L += ["## Method", "",
          "Photos rendered by `beadline render` with exact truth (photon and read noise on). "
          "Every method gets the same radius range: the photo's smallest truth radius -20 % to "
          "its largest +20 %. A detection matches a truth flash whose centre is in the frame when "
          "it is within 0.5 truth radius (Hungarian assignment); a detection on a flash outside "
          "the frame counts neither way; every other detection is a false positive (those on a "
          "distractor or on a floor reflection are counted separately). A truth image is "
          "*overlapping* when another flash's centre is closer than the sum of their radii. "
          "Photos of the `dark` class come with a clean plate (rendered by `beadline render "
          "--plate`): Beadline gets `--plate`, the references get |photo - plate| stretched "
          "to 0..255. "
          "Centre RMS is sqrt(mean(dx^2 + dy^2)) over matched images, in pixels (a few bad "
          "matches dominate it: the median and 95th percentile of the centre error are given "
          "beside it). Wall time is per "
          "photo and includes reading the file for every method (Beadline: the whole process). "
          "OpenCV uses its default threads (= cores); skimage runs single-threaded.", "",
          f"Reference parameters were tuned on ONE calibration photo (`{calib_name}`) by a grid "
          "search maximising F1 and then minimising centre RMS, and frozen for all other photos:",
          ""]
    L += ["| method | frozen parameters | settings tried | F1 on calibration | RMS on "
          "calibration (px) |", "|---|---|---|---|---|"]
    for m, f in frozen.items():
        ps = ", ".join(f"{k}={v}" for k, v in f["params"].items())
        L.append(f"| {m} | {ps} | {f['n']} | {f['f1']:.3f} | {f['rms']:.3f} |")
    L += ["", "Parameter meaning: `blur_sigma` Gaussian pre-blur (0 = none); `dp` accumulator "
          "resolution divisor; `canny_high` = OpenCV param1; `votes_per_circumference` sets "
          "HOUGH_GRADIENT param2 = value x 2 pi r_min (votes scale with the circle's length, so "
          "one frozen value means the same for every ball size); `perfectness` = "
          "HOUGH_GRADIENT_ALT param2; `min_dist_r` minimum centre distance in units of r_min; "
          "`threshold` = hough_circle_peaks threshold on the normalised accumulator.", ""]
    if beadline.available:
        L += [f"Beadline: {beadline.radius_note}.", ""]
    cols = ("| method | photos | recall | recall, neighbour >= 0.8 r | recall isolated | "
            "recall overlapping | precision | "
            "FP (distractor / reflection) | RMS isolated px (n) | RMS overlapping px (n) | "
            "median / p95 error px | time/photo s |")
    sep = "|---|---|---|---|---|---|---|---|---|---|---|---|"

    def line(m, s):
        return (f"| {m} | {s['photos']}{' (+%d failed)' % s['failed'] if s['failed'] else ''} | "
                f"{fmt(s['recall'])} | {fmt(s['recall_scope'])} | "
                f"{fmt(s['recall_iso'])} | {fmt(s['recall_ovl'])} | "
                f"{fmt(s['precision'])} | {s['fp']} ({s['fp_distractor']} / "
                f"{s['fp_reflection']}) | {fmt(s['rms_iso'])} ({s['n_iso']}) | "
                f"{fmt(s['rms_ovl'])} ({s['n_ovl']}) | "
                f"{fmt(s['median_err'])} / {fmt(s['p95_err'], '.2f')} | "
                f"{fmt(s['wall_s'] / max(1, s['photos']), '.2f')} |")

    test_rows = [r for r in rows if r["class"] != "calibration"]
    L += ["## All photos except the calibration photo", "", cols, sep]
    sums = {}
    for m in methods:
        sums[m] = summarise([r for r in test_rows if r["method"] == m])
        L.append(line(m, sums[m]))
    if beadline.available and "median_abs_err_over_sigma" in sums["beadline spots"]:
        s = sums["beadline spots"]
        L += ["", "Beadline's uncertainty (`sigma_px`, the per-axis 1-sigma of the centre), over "
              "all matched images: median per-axis |error| / sigma = "
              f"{s['median_abs_err_over_sigma']:.3f} (0.674 for a calibrated Gaussian); RMS of the "
              f"per-axis errors {s['rms_axis_err']:.3f} px against RMS of sigma "
              f"{s['rms_sigma']:.3f} px (ratio {s['rms_axis_err'] / s['rms_sigma']:.2f}; "
              "1 = calibrated, above 1 = sigma too optimistic)."]
        if "median_abs_err_over_sigma_iso" in s:
            L += ["", "Isolated images only: median per-axis |error| / sigma = "
                  f"{s['median_abs_err_over_sigma_iso']:.3f}; RMS per-axis error "
                  f"{s['rms_axis_err_iso']:.3f} px against RMS sigma {s['rms_sigma_iso']:.3f} px "
                  f"(ratio {s['rms_axis_err_iso'] / s['rms_sigma_iso']:.2f})."]
    (a, b), (c, _) = CROWDED_BINS
    L += ["", "## Crowded images", "",
          "Images by their nearest neighbour's distance (any other flash of the exposure, in "
          "the image's radii), all photos except the calibration photo: the crowding issue's "
          "targets are recall >= 0.99 for 0.4-0.8 r, >= 0.95 for 0.25-0.4 r and centre RMS "
          "<= 0.15 px for 0.4-0.8 r (spot finding alone: the second pass from the physics runs "
          "in `measure`, not here).", "",
          f"| method | recall, neighbour {a}-{b} r (n) | recall, neighbour {c}-{a} r (n) | "
          f"RMS px, neighbour {a}-{b} r |", "|---|---|---|---|"]
    for m in methods:
        q = sums[m]
        L.append(f"| {m} | {fmt(q[f'recall_{a}'])} ({q[f'n_{a}']}) | "
                 f"{fmt(q[f'recall_{c}'])} ({q[f'n_{c}']}) | {fmt(q[f'rms_{a}'])} |")
    q = sums.get("beadline spots", {})
    if "path_points" in q:
        L += ["", "The path of `beadline measure PHOTO --rate R --ball-diameter D` (the truth's rate "
              "and diameter; `--plate` where the photo has one), with its second pass from the "
              "physics: the images on the path against the truth, by the nearest neighbour's "
              "distance, and the path's images that are no ball image.", "",
              f"| path | recall, neighbour {a}-{b} r | recall, neighbour {c}-{a} r | recall, "
              f"neighbour >= {SCOPE_NN_R} r | RMS px, neighbour {a}-{b} r | path images | "
              "not a ball image (precision) | flash numbers the truth's less one constant |",
              "|---|---|---|---|---|---|---|---|",
              f"| beadline measure | {fmt(q[f'path_recall_{a}'])} | {fmt(q[f'path_recall_{c}'])} | "
              f"{fmt(q[f'path_recall_{SCOPE_NN_R}'])} | {fmt(q[f'path_rms_{a}'])} | "
              f"{q['path_points']} | {q['path_false']} ({fmt(q['path_precision'], '.4f')}) | "
              f"{q['path_numbered']} of {q['path_photos']} photos"
              + (f" (not: {', '.join(q['path_misnumbered'])})" if q['path_misnumbered'] else "")
              + " |"]
    scoped = [r for r in test_rows if r.get("in_scope", True)]
    L += ["", "## Within the target's scope", "",
          "The issue's targets cover images whose nearest neighbour's centre is at least "
          f"{SCOPE_NN_R} radius away (column *recall, neighbour >= 0.8 r*; nearer images, at the "
          "very slow start, are nearly one image) and photos a method can work on (not "
          "`dark_noplate`, where each image dims the backdrop by ~1/N, below its texture). "
          "Same photos as above without that class:", "", cols, sep]
    for m in methods:
        L.append(line(m, summarise([r for r in scoped if r["method"] == m])))
    L += ["", "Recall at precision 1 with an oracle threshold: the in-scope images each method "
          "finds before its first false positive, taking its detections in the order it returns "
          "them (strongest accumulator peak first for OpenCV and scikit-image), the cut chosen "
          "per photo from the truth. It is generous to the references, whose frozen settings "
          "trade precision for recall, and compares the detectors at the precision Beadline "
          "reports at.", "", "| method | recall, neighbour >= 0.8 r, before the first false "
          "positive | recall, neighbour >= 0.8 r, at the frozen setting | precision at the "
          "frozen setting |", "|---|---|---|---|"]
    for m in methods:
        s = summarise([r for r in scoped if r["method"] == m])
        L.append(f"| {m} | {fmt(s['recall_scope_first_fp'])} | {fmt(s['recall_scope'])} | "
                 f"{fmt(s['precision'])} |")
    L += ["", "## Per photo class", ""]
    for c in classes:
        names = sorted({r["photo"] for r in rows if r["class"] == c})
        L += [f"### {c}", "", "Photos: " + ", ".join(f"`{n}`" for n in names), "", cols, sep]
        for m in methods:
            L.append(line(m, summarise([r for r in rows if r["class"] == c and r["method"] == m])))
        if beadline.available:
            s = summarise([r for r in rows if r["class"] == c and r["method"] == "beadline spots"])
            if "median_abs_err_over_sigma" in s:
                L += ["", f"Beadline median per-axis |error|/sigma "
                      f"{s['median_abs_err_over_sigma']:.3f}; RMS per-axis error "
                      f"{s['rms_axis_err']:.3f} px vs RMS sigma {s['rms_sigma']:.3f} px."]
        L += yardstick_lines([r for r in rows if r["class"] == c])
        L.append("")
    L += ["## Per photo", "", "| photo | class | truth images (overlapping) | " +
          " | ".join(f"{m} hits / FP / RMS / median px" for m in methods) + " |",
          "|---|---|---|" + "---|" * len(methods)]
    for name in dict.fromkeys(r["photo"] for r in rows):
        rs = {r["method"]: r for r in rows if r["photo"] == name and r["method"] != YARDSTICK}
        any_r = next(r for r in rs.values() if "failed" not in r)
        cells = []
        for m in methods:
            r = rs.get(m)
            if r is None or "failed" in r:
                cells.append("failed")
            else:
                _, rms = f1_rms(r)
                med = float(np.median(np.hypot(r["err"][:, 0], r["err"][:, 1]))) \
                    if r["tp"] else None
                cells.append(f"{r['tp']} / {r['fp']} / {fmt(rms, '.2f')} / {fmt(med, '.2f')}")
        L.append(f"| {name} | {any_r['class']} | {any_r['n_truth']} "
                 f"({any_r['n_truth_overlap']}) | " + " | ".join(cells) + " |")
    if speed_rows:
        L += ["", "## Speed", "",
              "Median of the repeats. Decode = `cv2.imread` in colour and straight to grey (a "
              "reference decoder, libjpeg-turbo / libpng: `beadline` offers no decode-only "
              "timing; a JPEG read straight to grey skips the chroma). HoughCircles times are after decoding, "
              "with the frozen parameters and the truth radius range; Beadline is the whole "
              "process (decode included). Peak memory is the maximum resident set size from "
              "GNU `time -v`.", "",
              "| photo | size | flashes | ball r px | decode colour s | decode grey s | "
              "HOUGH_GRADIENT s (recall) | HOUGH_GRADIENT_ALT s (recall) | "
              "beadline spots s (recall) | beadline / decode colour | "
              "beadline / (decode colour + HOUGH_GRADIENT) | beadline peak MB |",
              "|---|---|---|---|---|---|---|---|---|---|---|---|"]
        for r in speed_rows:
            b = (f"{r['beadline_s']:.3f} ({r['beadline_recall']:.2f})" if "beadline_s" in r
                 else "–")
            ratio = (f"{r['beadline_s'] / r['decode_color_s']:.1f} | "
                     f"{r['beadline_s'] / (r['decode_color_s'] + r['hg_s']):.1f}"
                     if "beadline_s" in r else "– | –")
            mem = fmt(r.get("beadline_rss_mb"), ".0f")
            L.append(f"| {r['name']} | {r['w']}x{r['h']} ({r['w'] * r['h'] / 1e6:.1f} MP) | "
                     f"{r['n_flashes']} | {r['r_px']:.0f} | {r['decode_color_s']:.3f} | "
                     f"{r['decode_s']:.3f} | "
                     f"{r['hg_s']:.3f} ({r['hg_recall']:.2f}) | {r['alt_s']:.3f} "
                     f"({r['alt_recall']:.2f}) | {b} | {ratio} | {mem} |")
    path.write_text("\n".join(L) + "\n")


# ----------------------------------------------------------------------------------------------

def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--beadline", default=os.environ.get("BEADLINE", "./target/release/beadline"))
    ap.add_argument("--spots-cmd", default=os.environ.get("BEADLINE_SPOTS_CMD"),
                    help="command run as `CMD PHOTO --format json` instead of `BEADLINE spots` "
                    "(for testing the harness with a stand-in)")
    ap.add_argument("--out", default=str(HERE / "out"))
    ap.add_argument("--report", help="report path (default bench/RESULTS.md, or "
                    "bench/RESULTS-references-only.md without Beadline)")
    ap.add_argument("--only", help="comma-separated photo names (plus the calibration photo)")
    ap.add_argument("--no-speed", action="store_true")
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--report-only", action="store_true",
                    help="rewrite the report from the last run's OUT/results.pickle")
    args = ap.parse_args()
    t_start = time.perf_counter()

    def log(msg):
        print(msg, flush=True)

    out = pathlib.Path(args.out)
    source_binary = pathlib.Path(args.beadline).resolve()
    if not args.report_only:
        # Run one fixed build all through: copy the binary, so a rebuild during the run changes
        # nothing.
        (out / "bin").mkdir(parents=True, exist_ok=True)
        shutil.copy2(source_binary, out / "bin" / "beadline")
    binary = str(out / "bin" / "beadline")
    if args.report_only:
        with open(out / "results.pickle", "rb") as fh:
            saved = pickle.load(fh)
        beadline = Beadline(binary, saved["spots_cmd"])
        report(pathlib.Path(saved["path"] if not args.report else args.report), saved["rows"],
               saved["frozen"], saved["calib"], saved["speed_rows"], beadline,
               saved["versions"], saved["elapsed"], saved["cmdline"])
        log("rewrote the report")
        return
    manifest = suite.write(out / "scenes")
    if args.only:
        keep = set(args.only.split(","))
        manifest["accuracy"] = [e for e in manifest["accuracy"]
                                if e["name"] in keep or e["class"] == "calibration"]
        manifest["speed"] = [e for e in manifest["speed"] if e["name"] in keep]
    if args.no_speed:
        manifest["speed"] = []
    entries = [(e["name"], e["ext"], e.get("plate", False))
               for e in manifest["accuracy"] + manifest["speed"]]
    log(f"rendering {len(entries)} scenes with {binary}")
    photos = render_all(binary, out / "scenes", out / "photos", entries, log)

    beadline = Beadline(binary, args.spots_cmd)
    log("beadline spots: " + ("available" if beadline.available else
                              f"SKIPPED ({beadline.reason})"))

    calib = next(e for e in manifest["accuracy"] if e["class"] == "calibration")["name"]
    log(f"tuning the references on {calib}")
    frozen = tune(read_gray(photos[calib][0]), Truth(photos[calib][1]), log)
    (out / "frozen_params.json").write_text(json.dumps(frozen, indent=1, default=float) + "\n")

    log("evaluating")
    rows = evaluate(photos, manifest, frozen, beadline, log)
    log("speed")
    speed_rows = speed(photos, manifest, frozen, beadline, args.repeat, log)

    versions = {"python": platform.python_version(), "numpy": np.__version__,
                "opencv": cv2.__version__, "scikit-image": skimage.__version__,
                "scipy": scipy.__version__,
                "beadline": beadline.version().removeprefix("beadline ")}
    st = pathlib.Path(binary).stat()
    built = datetime.datetime.fromtimestamp(st.st_mtime, datetime.timezone.utc)
    digest = hashlib.sha256(pathlib.Path(binary).read_bytes()).hexdigest()[:12]
    versions["beadline binary"] = f"copy of {source_binary} built {built:%Y-%m-%d %H:%M UTC}, " \
                                  f"sha256 {digest}"
    if args.spots_cmd:
        versions["spots command"] = args.spots_cmd
    try:
        versions["git HEAD beside the binary"] = subprocess.run(
            ["git", "-C", str(source_binary.parent), "rev-parse", "--short", "HEAD"],
            capture_output=True, text=True).stdout.strip() or "unknown"
    except OSError:
        pass
    if args.report:
        path = pathlib.Path(args.report)
    else:
        path = HERE / ("RESULTS.md" if beadline.available else "RESULTS-references-only.md")
    cmdline = os.environ.get("BENCH_CMDLINE",
                             " ".join(shlex.quote(a) for a in sys.argv)).strip()
    elapsed = time.perf_counter() - t_start
    with open(out / "results.pickle", "wb") as fh:
        pickle.dump({"rows": rows, "frozen": frozen, "calib": calib, "speed_rows": speed_rows,
                     "versions": versions, "elapsed": elapsed, "cmdline": cmdline,
                     "path": str(path), "spots_cmd": args.spots_cmd}, fh)
    report(path, rows, frozen, calib, speed_rows, beadline, versions, elapsed, cmdline)
    log(f"wrote {path} in {(time.perf_counter() - t_start) / 60:.1f} min")


if __name__ == "__main__":
    main()
