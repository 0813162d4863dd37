#!/usr/bin/env python3
"""Real-balls benchmark: `beadline spots` and `beadline measure` on rendered photos of balls
that are not the renderer's plain sphere (the real-balls issue): printed markings (seams, panel
lines, a band, a dot on a spinning ball), light from one side (a crescent), a glossy highlight
from another direction, motion toward the camera, and a bright shape on the backdrop behind the
path. Each look is rendered at three radii, three times with other seeds (`--copies`), beside
the plain ball of the same scene, so every figure is measured side by side in one run; the
centre RMS of each look is given against its plain look's with a bootstrap interval.

Per look: the spots' recall (images 0.8 radius or more from a neighbour), precision, centre RMS
(isolated and overlapping images), spots found twice on one image; the path of `measure` (images
on the path, images that are no ball image, flash numbers right); the restitution of every bounce
against the truth, each counted right (within 3 sigma + 0.005), flagged (wrong, but measure
exits non-zero or warns) or silently wrong (wrong with exit 0 and no warning).

Usage: bench/run_real_balls.sh  (writes bench/REAL_BALLS_RESULTS.md; photos in bench/out/real/)
"""
import argparse
import datetime
import json
import pathlib
import subprocess
import sys
import time

import numpy as np

sys.path.insert(0, str(pathlib.Path(__file__).resolve().parent))
import spots_bench as sb  # noqa: E402
import suite  # noqa: E402

RADII = (14.0, 20.0, 30.0)

# look name -> (what it is, changes to the plain scene: ball, photo, extra tables, throw?)
LOOKS = {
    "plain": ("the renderer's plain sphere (the yardstick)", {}, {}, {}, False),
    "seams": ("three seam lines, dark (albedo 0.25), 0.1 radius wide",
              {"markings": "seams"}, {}, {}, False),
    "panels_jpeg": ("five panel lines, JPEG quality 85",
                    {"markings": "panels", "marking_width": 0.08}, {"jpeg_quality": 85}, {},
                    False),
    "band": ("one band through the centre (symmetric under half a turn)",
             {"markings": "band", "marking_width": 0.15}, {}, {}, False),
    "dot_spin": ("a printed dot on a throw spinning at -4 turns/s",
                 {"markings": "dot", "marking_albedo": 0.15}, {}, {"spin_hz": -4.0}, True),
    "side_lit": ("seams, flash from the right side (fill 0.05): a crescent",
                 {"markings": "seams"},
                 {"light_dir": [1.0, -0.15, 0.25], "fill": 0.05}, {}, False),
    "glossy": ("a strong, sharp highlight from another light (gloss 1.2, power 120)",
               {}, {"gloss": 1.2, "gloss_power": 120.0, "gloss_dir": [0.6, -0.5, 1.0]}, {},
               False),
    "depth": ("moving toward the camera at 0.08 m/s (camera 1.6 m away: ~8 % growth)",
              {}, {}, {"depth": {"toward_camera_mps": 0.08}}, False),
    "backdrop": ("a bright panel (level 0.45) behind part of the path",
                 {"markings": "seams"}, {},
                 {"backdrop_shapes": [{"x_px": 760.0, "y_px": 560.0, "width_px": 260.0,
                                       "height_px": 330.0, "level": 0.45}]}, False),
    # Yardsticks of the same conditions without markings (appended: the seeds of the looks
    # above follow their order).
    "plain_jpeg": ("the plain sphere at JPEG quality 85 (the yardstick of panels_jpeg)", {},
                   {"jpeg_quality": 85}, {}, False),
    "plain_side_lit": ("the plain sphere lit from the right side, fill 0.05 (the yardstick of "
                       "side_lit)", {}, {"light_dir": [1.0, -0.15, 0.25], "fill": 0.05}, {},
                       False),
    "plain_backdrop": ("the plain sphere before the bright panel (the yardstick of backdrop)", {},
                       {}, {"backdrop_shapes": [{"x_px": 760.0, "y_px": 560.0, "width_px": 260.0,
                                                 "height_px": 330.0, "level": 0.45}]}, False),
}


# The plain look each look is held against (same scene, light and compression, no markings);
# `dot_spin` is a throw, which no plain look renders.
YARDSTICK = {"seams": "plain", "panels_jpeg": "plain_jpeg", "band": "plain",
             "side_lit": "plain_side_lit", "glossy": "plain", "depth": "plain",
             "backdrop": "plain_backdrop"}


def scenes(copies):
    """(name, look, radius, extension, scene dict) of every photo: each look at each radius,
    `copies` times with other seeds (other noise, other turns of the markings)."""
    out = []
    for k in range(copies):
        out += scenes_of_copy(k)
    return out


def scenes_of_copy(copy):
    """The photos of copy number `copy` (0: the first, whose seeds and names have no suffix)."""
    out = []
    for li, (look, (_, ball, photo, extra, throw)) in enumerate(LOOKS.items()):
        for ri, r in enumerate(RADII):
            doc = suite.scene(1100 + 10 * li + ri + 1000 * copy, r, incline=not throw)
            doc["ball"].update(ball)
            doc["photo"].update(photo)
            if throw and "spin_hz" in extra:
                doc["start"]["spin_hz"] = extra["spin_hz"]
            for k, v in extra.items():
                if k != "spin_hz":
                    doc[k] = v
            ext = "jpg" if photo.get("jpeg_quality", 92) < 92 else "png"
            suffix = f"_c{copy}" if copy else ""
            out.append((f"{look}_r{int(r)}{suffix}", look, r, ext, doc))
    return out


def measure(binary, photo, truth):
    """`beadline measure` with the truth's rate and ball diameter: (exit status, document)."""
    cmd = [binary, "measure", str(photo), "--rate", repr(truth.doc["rate_hz"]),
           "--ball-diameter", repr(2.0 * truth.doc["ball_radius_m"]), "--format", "json"]
    p = subprocess.run(cmd, capture_output=True, text=True)
    try:
        return p.returncode, json.loads(p.stdout)
    except json.JSONDecodeError:
        return p.returncode, {}


def bounce_classes(status, doc, truth):
    """Each measured bounce's restitution against the truth's bounce nearest in time: right /
    flagged / silent. The measured clock is tied to the truth's through the path's first
    image, matched to the nearest truth flash."""
    warned = any(c.get("outcome") in ("warn", "fail") for c in doc.get("checks", []))
    true_e = [b["restitution"] for b in truth.doc["bounces"]]
    true_t = np.array([b["t_s"] for b in truth.doc["bounces"]], float)
    path = doc.get("path", [])
    if not path or not len(true_t):
        return []
    flashes = truth.doc["flashes"]
    d = [np.hypot(f["x_px"] - path[0]["x_px"], f["y_px"] - path[0]["y_px"]) for f in flashes]
    shift = flashes[int(np.argmin(d))]["t_s"] - path[0]["t_s"]
    out = []
    for b in doc.get("bounces", []):
        e, s = b.get("restitution"), b.get("restitution_sigma")
        if e is None or s is None:
            continue
        j = int(np.argmin(np.abs(true_t - (b["t_s"] + shift))))
        ok = abs(e - true_e[j]) <= 3.0 * s + 0.005
        out.append("right" if ok else ("flagged" if status != 0 or warned else "silent"))
    return out


def spin_figures(doc, truth):
    """The spin read against the truth: (angle errors in degrees, relative to the first image
    read, of every image with an angle; per phase (relative error of spin_hz, error in sigmas)).
    Images are matched to the nearest truth flash; a phase's true spin is the mean of the
    truth's turns over the steps between consecutive images that both have an angle."""
    flashes = truth.doc["flashes"]

    def nearest(p):
        return min(flashes, key=lambda q: (q["x_px"] - p["x_px"]) ** 2 + (q["y_px"] - p["y_px"]) ** 2)

    path = doc.get("path", [])
    errs, base = [], None
    for p in path:
        if p.get("spin_angle_deg") is None:
            continue
        f = nearest(p)
        if base is None:
            base = (p["spin_angle_deg"], f["spin_angle_deg"])
        errs.append((p["spin_angle_deg"] - base[0]) - (f["spin_angle_deg"] - base[1]))
    phases = []
    dt = 1.0 / truth.doc["rate_hz"]
    for s in doc.get("spin", []):
        # The truth's turns over the same steps: consecutive images of the phase that both
        # have an angle (the phase's spin is the mean over the turns read).
        turns = [nearest(b)["spin_angle_deg"] - nearest(a)["spin_angle_deg"]
                 for a, b in zip(path, path[1:])
                 if s["first_n"] <= a["n"] and b["n"] <= s["last_n"] and b["n"] == a["n"] + 1
                 and a.get("spin_angle_deg") is not None
                 and b.get("spin_angle_deg") is not None]
        if not turns or s.get("spin_hz_sigma") is None:
            continue
        true_hz = sum(turns) / len(turns) / 360.0 / dt
        err = s["spin_hz"] - true_hz
        phases.append((err / true_hz if true_hz else float("nan"), err / s["spin_hz_sigma"]))
    return errs, phases


def spots_figures(binary, photo, truth):
    bl = sb.Beadline(binary)
    xyr, sigma, _, _, _ = bl.spots(photo, truth.rmin, truth.rmax)
    res = sb.match(truth, xyr, sigma)
    # Found twice: an unmatched spot within one radius of a matched truth image.
    det = np.asarray(xyr, float).reshape(-1, 3)
    T = truth.flashes
    matched = np.zeros(len(det), bool)
    twice = 0
    if len(det) and len(T):
        d = np.hypot(T[:, None, 0] - det[None, :, 0], T[:, None, 1] - det[None, :, 1])
        ok = d < sb.MATCH_FRACTION * T[:, 2:3]
        from scipy.optimize import linear_sum_assignment
        ri, ci = linear_sum_assignment(np.where(ok, d, 1e6))
        matched[ci[ok[ri, ci]]] = True
        twice = int(((d[:, ~matched] < T[:, 2:3]).any(axis=0)).sum())
    res["twice"] = twice
    return res


def summarise(rows):
    tp = sum(r["tp_scope"] for r in rows)
    n = sum(r["n_truth_scope"] for r in rows)
    fp = sum(r["fp"] for r in rows)
    all_tp = sum(r["tp"] for r in rows)
    iso = np.concatenate([r["err"][~r["overlap"]] for r in rows]) if rows else np.zeros((0, 2))
    ovl = np.concatenate([r["err"][r["overlap"]] for r in rows]) if rows else np.zeros((0, 2))
    rms = lambda e: float(np.sqrt((e ** 2).sum(axis=1).mean())) if len(e) else None  # noqa
    classes = [c for r in rows for c in r["e_classes"]]
    return {
        "recall": tp / n if n else None, "precision": all_tp / (all_tp + fp) if all_tp else None,
        "rms_iso": rms(iso), "rms_ovl": rms(ovl), "twice": sum(r["twice"] for r in rows),
        "path": sum(r["path_points"] for r in rows),
        "truth": sum(r["n_truth"] for r in rows),
        "path_false": sum(r["path_false"] for r in rows),
        "numbered": sum(bool(r["path_numbered"]) for r in rows),
        "photos": len(rows), "exit": [r["exit"] for r in rows],
        "e_right": classes.count("right"), "e_flagged": classes.count("flagged"),
        "e_silent": classes.count("silent"),
        "angles": sum(len(r["spin_errs"]) for r in rows),
        "angle_rms": float(np.sqrt(np.mean(np.square(np.concatenate(
            [r["spin_errs"] for r in rows]))))) if any(r["spin_errs"] for r in rows) else None,
        "spin_phases": sum(len(r["spin_phases"]) for r in rows),
        "spin_checks": sum(len(r["spin_checks"]) for r in rows),
        "spin_false": sum(o != "pass" for r in rows for o in r["spin_checks"]),
        "spin_worst_rel": max((abs(p[0]) for r in rows for p in r["spin_phases"]), default=None),
        "spin_over_3sigma": sum(abs(p[1]) > 3.0 for r in rows for p in r["spin_phases"]),
    }


def ratio_with_interval(rows, look, yardstick, overlap, resamples=2000):
    """Centre RMS of `look` over that of `yardstick` (isolated or overlapping images) and its
    bootstrap 68 % interval (images resampled with replacement within each look; Efron,
    "Bootstrap methods: another look at the jackknife", Ann. Statist. 7, 1979)."""
    def squared(name):
        e = [r["err"][r["overlap"] == overlap] for r in rows if r["look"] == name]
        return (np.concatenate(e) ** 2).sum(axis=1) if e else np.zeros(0)
    a, b = squared(look), squared(yardstick)
    if not len(a) or not len(b) or b.mean() <= 0:
        return None
    rng = np.random.default_rng(1)
    ra = a[rng.integers(0, len(a), (resamples, len(a)))].mean(axis=1)
    rb = b[rng.integers(0, len(b), (resamples, len(b)))].mean(axis=1)
    boot = np.sqrt(ra / np.maximum(rb, 1e-300))
    lo, hi = np.percentile(boot, [16, 84])
    return float(np.sqrt(a.mean() / b.mean())), float(lo), float(hi), len(a)


def ratio_table(rows):
    L = ["", "## Centre RMS against the plain ball", "",
         "Each look's centre RMS over that of the plain look of the same scene, light and "
         "compression (the issue's target: at most 2), with its bootstrap 68 % interval "
         "(images resampled within each look, 2000 times) and the images counted.", "",
         "| look | against | isolated | overlapping |", "|---|---|---|---|"]
    for look, yard in YARDSTICK.items():
        cells = []
        for overlap in (False, True):
            q = ratio_with_interval(rows, look, yard, overlap)
            cells.append("–" if q is None else
                         f"{q[0]:.2f} ({q[1]:.2f}-{q[2]:.2f}; {q[3]} images)")
        L.append(f"| {look} | {yard} | {cells[0]} | {cells[1]} |")
    return L


def report(path, rows, binary, elapsed_s, copies):
    L = ["# Real-balls benchmark: results", "",
         f"Date: {datetime.datetime.now(datetime.timezone.utc):%Y-%m-%d %H:%M} UTC  ",
         f"Machine: {sb.machine()}  ",
         f"Binary: {binary} ({sb.Beadline(binary).version()})  ",
         f"Command: `bench/run_real_balls.sh` ({elapsed_s / 60:.1f} min in all)", "",
         "Photos rendered by `beadline render` (photon noise on) from the spots suite's incline "
         "scene (a throw for `dot_spin`), one look at a time, at radii "
         + ", ".join(f"{r:.0f}" for r in RADII) + f" px, {copies} times each with other seeds "
         "(other noise, other turns of the markings; the first copy's photos carry no suffix). "
         "`spots` gets the truth's radius range "
         "-20 %/+20 %; `measure` the truth's flash rate and ball diameter. Recall counts images "
         "0.8 radius or more from a neighbour; *twice* counts spots within one radius of an "
         "image already matched; *e* counts each bounce's restitution against the truth: right "
         "within 3 sigma + 0.005, flagged when wrong and `measure` exits non-zero or warns, "
         "silent when wrong with exit 0 and no warning.", "",
         "Spin (read from the markings, `path[].spin_angle_deg` and `spin[]`): *angles* counts "
         "the path images given an angle, with the RMS of their error against the truth (both "
         "counted from the first image read); *phases* counts the phases given a spin rate, with "
         "the worst relative error and how many are off by more than 3 sigma (wrong without a "
         "warning: a phase's spin rate is checked only at a bounce, by `spin_at_bounce`). *spin checks* counts the `rolling_slip` and "
         "`spin_at_bounce` checks made and how many did not pass (all false warnings here: these "
         "looks roll without slipping and the renderer keeps the angular momentum about the "
         "contact point).", "",
         "| look | what | recall | precision | RMS isolated px | RMS overlapping px | twice "
         "| path / truth images | path not a ball | flash numbers right | exit | e right / "
         "flagged / silent | angles (RMS deg) | spin phases (worst error, over 3 sigma) "
         "| spin checks (not passed) |",
         "|---" * 15 + "|"]
    for look, (what, *_rest) in LOOKS.items():
        s = summarise([r for r in rows if r["look"] == look])
        L.append(f"| {look} | {what} | {sb.fmt(s['recall'])} | {sb.fmt(s['precision'])} | "
                 f"{sb.fmt(s['rms_iso'])} | {sb.fmt(s['rms_ovl'])} | {s['twice']} | "
                 f"{s['path']} / {s['truth']} | {s['path_false']} | {s['numbered']} of "
                 f"{s['photos']} | {' '.join(map(str, s['exit']))} | {s['e_right']} / "
                 f"{s['e_flagged']} / {s['e_silent']} | {s['angles']} "
                 f"({sb.fmt(s['angle_rms'], '.2f')}) | {s['spin_phases']} "
                 f"({sb.fmt(s['spin_worst_rel'], '.2%')}, {s['spin_over_3sigma']}) | "
                 f"{s['spin_checks']} ({s['spin_false']}) |")
    L += ratio_table(rows)
    L += ["", "## Per photo", "",
          "| photo | recall | fp | twice | RMS px | path / truth | numbered | exit | e |",
          "|---|---|---|---|---|---|---|---|---|"]
    for r in rows:
        rms = np.sqrt((r["err"] ** 2).sum(axis=1).mean()) if r["tp"] else None
        L.append(f"| {r['name']} | {r['tp_scope']}/{r['n_truth_scope']} | {r['fp']} | "
                 f"{r['twice']} | {sb.fmt(rms)} | {r['path_points']} / {r['n_truth']} | "
                 f"{'yes' if r['path_numbered'] else 'no'} | {r['exit']} | "
                 f"{' '.join(r['e_classes']) or '–'} |")
    path.write_text("\n".join(L) + "\n")


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--beadline", default="target/release/beadline")
    ap.add_argument("--out", default="bench/REAL_BALLS_RESULTS.md")
    ap.add_argument("--copies", type=int, default=3,
                    help="photos of each look and radius, each with its own seed")
    args = ap.parse_args()
    t0 = time.perf_counter()
    scene_dir, photo_dir = pathlib.Path("bench/out/real/scenes"), pathlib.Path("bench/out/real")
    scene_dir.mkdir(parents=True, exist_ok=True)
    entries = []
    looks = {}
    for name, look, _r, ext, doc in scenes(args.copies):
        (scene_dir / f"{name}.toml").write_text(suite.to_toml(doc))
        entries.append((name, ext, False))
        looks[name] = look
    photos = sb.render_all(args.beadline, scene_dir, photo_dir, entries, print)
    rows = []
    for name, (photo, tpath) in photos.items():
        truth = sb.Truth(tpath)
        res = spots_figures(args.beadline, photo, truth)
        status, doc = measure(args.beadline, photo, truth)
        path = doc.get("path", [])
        xy = np.array([[q["x_px"], q["y_px"]] for q in path], float).reshape(-1, 2)
        n = np.array([q["n"] for q in path], int)
        res.update(sb.path_match(truth, (xy, n)))
        res.update({"name": name, "look": looks[name], "exit": status,
                    "e_classes": bounce_classes(status, doc, truth)})
        res["spin_errs"], res["spin_phases"] = spin_figures(doc, truth)
        # The spin checks: the renderer keeps the angular momentum about the contact point and
        # these looks roll without slipping, so every warning of theirs is a false one.
        res["spin_checks"] = [c.get("outcome") for c in doc.get("checks", [])
                              if c.get("check") in ("rolling_slip", "spin_at_bounce")]
        rows.append(res)
        print(f"  {name}: spots {res['tp']}/{res['n_truth']} fp {res['fp']} twice "
              f"{res['twice']}, path {res['path_points']}, exit {status}, "
              f"e {' '.join(res['e_classes'])}")
    report(pathlib.Path(args.out), rows, args.beadline, time.perf_counter() - t0, args.copies)
    print(f"wrote {args.out}")


if __name__ == "__main__":
    main()
