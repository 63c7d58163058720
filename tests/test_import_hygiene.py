"""Pure computation never imports widget or plotting code (issue 2 §1)."""

from __future__ import annotations

import pkgutil
import subprocess
import sys

import modalnb

FORBIDDEN = ("ipywidgets", "plotly", "tqdm.auto", "anywidget", "matplotlib")


def _headless_modules() -> list[str]:
    names = ["modalnb"]
    for info in pkgutil.walk_packages(modalnb.__path__, "modalnb."):
        if info.name.startswith("modalnb.widgets") or info.name.endswith("__main__"):
            continue
        names.append(info.name)
    return names


def test_headless_modules_do_not_import_widgets():
    mods = _headless_modules()
    assert "modalnb.records" in mods
    code = (
        "import importlib, sys\n"
        f"for m in {mods!r}: importlib.import_module(m)\n"
        f"bad = [m for m in {FORBIDDEN!r} if m in sys.modules]\n"
        "print(','.join(bad))\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "", f"headless import pulled in: {out.stdout.strip()}"
