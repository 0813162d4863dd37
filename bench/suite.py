#!/usr/bin/env python3
"""Scene suite of the spots benchmark: scene TOML files for `beadline render`.

Every scene is one of our own rigs (a ball rolling off a short incline and bouncing along a floor
plate, or a free throw), varied along one axis at a time from a common base:

  calibration  the one photo the reference detectors are tuned on (then frozen)
  size         ball radius 8 .. 40 px, lossless PNG
  jpeg85       the same at JPEG quality 85
  dark         dark ball on a bright backdrop, with a clean plate (each image dims the backdrop by
               only ~1/N of its level for N flashes, below the backdrop's texture: a plate is how
               such photos are worked; the references get |photo - plate|)
  dark_noplate the same without a plate: outside the target's scope (no method finds them)
  overlap      slow start on the incline: early first flash, images overlapping heavily (r 8 .. 30)
  distractors  round objects of radii outside the +-20% search range in the picture
  glossy       glossy floor: mirror images of the ball in the floor plate
  tilt         camera turned about its vertical axis and rolled, with slight lens distortion

Photon noise is on everywhere. The speed scenes scale the image to 1.5, 12 and 24 MP, and vary the
number of flashes (10, 40, 160) at 1.5 MP.

Run: python bench/suite.py OUTDIR  (writes OUTDIR/NAME.toml and OUTDIR/manifest.json)
"""
import json
import pathlib
import sys

BASE_W, BASE_H, BASE_SCALE = 1600, 900, 1000.0


def _toml_value(v):
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        return repr(v)
    if isinstance(v, str):
        return json.dumps(v)
    if isinstance(v, list) and all(isinstance(x, (int, float)) for x in v):
        return "[" + ", ".join(_toml_value(float(x)) for x in v) + "]"
    raise TypeError(v)


def to_toml(doc):
    """Serialise a scene dict: scalars first, then tables, then arrays of tables."""
    lines = []
    for k, v in doc.items():
        if not isinstance(v, (dict, list)):
            lines.append(f"{k} = {_toml_value(v)}")
    for k, v in doc.items():
        if isinstance(v, dict):
            lines.append(f"\n[{k}]")
            lines += [f"{kk} = {_toml_value(vv)}" for kk, vv in v.items()]
    for k, v in doc.items():
        if isinstance(v, list):
            for item in v:
                lines.append(f"\n[[{k}]]")
                lines += [f"{kk} = {_toml_value(vv)}" for kk, vv in item.items()]
    return "\n".join(lines) + "\n"


def scene(seed, r_px, *, polarity="bright", jpeg_quality=92, glossy=False, tilt_deg=0.0,
          roll_deg=0.0, k1=0.0, first_flash_s=0.15, rate_hz=25.0, exposure_s=1.45,
          max_flashes=None, distractors=(), width=BASE_W, height=BASE_H, incline=True,
          angle_deg=20.0, floor_depth_m=0.02, reflectance=0.3):
    """A scene dict. `r_px` is the ball radius in pixels at the image centre."""
    k = width / BASE_W
    scale = BASE_SCALE * k
    doc = {
        "seed": seed,
        "ball": {"diameter_m": 2.0 * r_px / scale, "build": "solid"},
    }
    if incline:
        doc["incline"] = {"length_m": 0.25, "angle_deg": angle_deg, "bottom_height_m": 0.45,
                          "bottom_x_m": 0.0}
    else:
        doc["start"] = {"x_m": -0.15, "y_m": 0.35, "vx_mps": 1.1, "vy_mps": 1.6}
    doc["floor"] = {"restitution": 0.78, "tangential_ratio": 0.97, "glossy": glossy,
                    "reflectance": reflectance, "depth_m": floor_depth_m}
    strobe = {"rate_hz": rate_hz, "first_flash_s": first_flash_s, "exposure_s": exposure_s}
    if max_flashes:
        strobe["max_flashes"] = max_flashes
    doc["strobe"] = strobe
    doc["camera"] = {"px_per_m": scale, "width_px": width, "height_px": height,
                     "origin_x_px": 300.0 * k, "origin_y_px": height - 80.0 * k,
                     "roll_deg": roll_deg, "tilt_deg": tilt_deg, "k1": k1}
    doc["photo"] = {"polarity": polarity, "noise": True, "jpeg_quality": jpeg_quality}
    if distractors:
        doc["distractors"] = [{"x_px": float(x), "y_px": float(y), "r_px": float(r),
                               "albedo": float(a)} for x, y, r, a in distractors]
    return doc


def accuracy_suite():
    """(name, class, photo extension, scene dict) of the accuracy suite."""
    s = []
    # Calibration: a representative photo with some of every difficulty in a mild form (a slow
    # start with overlapping images, two distractors of other radii), so that F1 separates the
    # settings instead of every setting scoring 1.
    s.append(("calib_r18", "calibration", "png",
              scene(101, 18.0, first_flash_s=0.05, rate_hz=30.0, exposure_s=1.3,
                    distractors=[(1250, 170, 9.0, 0.6), (900, 150, 29.0, 0.6)])))
    for i, r in enumerate((8.0, 14.0, 24.0, 40.0)):
        s.append((f"size_r{int(r)}", "size", "png", scene(200 + i, r)))
    for i, r in enumerate((10.0, 18.0, 32.0)):
        s.append((f"jpeg85_r{int(r)}", "jpeg85", "jpg", scene(300 + i, r, jpeg_quality=85)))
    for i, r in enumerate((12.0, 20.0, 32.0)):
        s.append((f"dark_r{int(r)}", "dark", "png", scene(400 + i, r, polarity="dark")))
    s.append(("dark_jpeg85_r20", "dark", "jpg",
              scene(410, 20.0, polarity="dark", jpeg_quality=85)))
    s.append(("dark_noplate_r20", "dark_noplate", "png", scene(420, 20.0, polarity="dark")))
    # The smallest ball (r 8, seed 503) came last: seeds 500-502 keep their photos.
    for i, r in ((3, 8.0), (0, 12.0), (1, 20.0), (2, 30.0)):
        s.append((f"overlap_r{int(r)}", "overlap", "png",
                  scene(500 + i, r, first_flash_s=0.0, rate_hz=40.0, exposure_s=1.2,
                        angle_deg=12.0)))
    for i, r in enumerate((16.0, 26.0)):
        # Round objects of other radii, one overlapping the path.
        d = [(1250, 170, 0.5 * r, 0.6), (1450, 200, 1.6 * r, 0.5), (900, 150, 2.2 * r, 0.7),
             (600, 120, 0.7 * r, 0.5), (1500, 420, 1.3 * r, 0.5), (760, 560, 1.4 * r, 0.4)]
        s.append((f"distractors_r{int(r)}", "distractors", "png",
                  scene(600 + i, r, distractors=d)))
    for i, r in enumerate((16.0, 30.0)):
        s.append((f"glossy_r{int(r)}", "glossy", "png", scene(700 + i, r, glossy=True, floor_depth_m=0.075, reflectance=0.45)))
    s.append(("tilt25_r20", "tilt", "png", scene(800, 20.0, tilt_deg=25.0, roll_deg=3.0)))
    s.append(("tilt35_r14_jpeg85", "tilt", "jpg",
              scene(801, 14.0, tilt_deg=-35.0, roll_deg=-4.0, k1=-0.05, jpeg_quality=85)))
    s.append(("throw_tilt20_r24", "tilt", "png",
              scene(802, 24.0, incline=False, tilt_deg=20.0, k1=0.04)))
    return s


def speed_suite():
    """(name, kind, megapixels or flash count, photo extension, scene dict) of the speed section."""
    s = []
    for w, h in ((1500, 1000), (4240, 2830), (6000, 4000)):
        mp = w * h / 1e6
        s.append((f"speed_{w}x{h}", "size", round(mp, 1), "jpg",
                  scene(900, 20.0 * w / BASE_W, width=w, height=h)))
    for n, rate in ((10, 7.0), (40, 28.0), (160, 112.0)):
        s.append((f"speed_flashes{n}", "flashes", n, "jpg",
                  scene(910, 8.0, width=1500, height=1000, rate_hz=rate, max_flashes=n,
                        exposure_s=1.45)))
    return s


def write(outdir):
    out = pathlib.Path(outdir)
    out.mkdir(parents=True, exist_ok=True)
    manifest = {"accuracy": [], "speed": []}
    for name, cls, ext, doc in accuracy_suite():
        (out / f"{name}.toml").write_text(to_toml(doc))
        manifest["accuracy"].append({"name": name, "class": cls, "ext": ext,
                                     "plate": cls == "dark",
                                     "in_scope": cls != "dark_noplate"})
    for name, kind, value, ext, doc in speed_suite():
        (out / f"{name}.toml").write_text(to_toml(doc))
        manifest["speed"].append({"name": name, "kind": kind, "value": value, "ext": ext})
    (out / "manifest.json").write_text(json.dumps(manifest, indent=1) + "\n")
    return manifest


if __name__ == "__main__":
    m = write(sys.argv[1] if len(sys.argv) > 1 else "bench/out/suite")
    print(f"{len(m['accuracy'])} accuracy scenes, {len(m['speed'])} speed scenes")
