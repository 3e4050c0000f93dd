"""Runs the engine's headless example and returns its Evaluation as a dict."""

import json
import os
import shutil
import subprocess
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]


def binary():
    target = Path(os.environ.get("CARGO_TARGET_DIR", ROOT / "target"))
    if not target.is_absolute():
        target = ROOT / target
    return target / "release" / "examples" / "evaluate"


def ensure_built():
    """Builds the example with cargo. cargo is asked even when a binary exists (a no-op when
    it is up to date), so a binary older than the sources is never compared by mistake."""
    exe = binary()
    if shutil.which("cargo"):
        r = subprocess.run(
            ["cargo", "build", "--release", "-q", "-p", "clockwright-core", "--example", "evaluate"],
            cwd=ROOT,
            stdout=subprocess.PIPE,
            stderr=subprocess.PIPE,
            text=True,
        )
        if r.returncode != 0:
            if not exe.exists():
                raise RuntimeError("cargo build of the evaluate example failed:\n" + r.stderr)
            print("warning: cargo build failed; using the existing binary " + str(exe))
    if not exe.exists():
        raise RuntimeError(f"{exe} is missing and cargo is not available to build it")
    return exe


def evaluate(exe, design_path, options_path=None):
    args = [str(exe), str(design_path)]
    if options_path is not None:
        args.append(str(options_path))
    r = subprocess.run(args, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    if r.returncode != 0:
        raise RuntimeError(f"evaluate {design_path} failed ({r.returncode}): {r.stderr}")
    return json.loads(r.stdout)
