"""report.html: self-contained, every image embedded and a valid PNG; margins in the summary."""

import base64
import json
import re

from robustff.cli import main

PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"


def test_report_embeds_every_image_and_the_caution(tmp_path, capsys):
    out = tmp_path / "out"
    status = main(
        [
            "run",
            "cases/syrup-dilution.toml",
            "--samples",
            "300",
            "--jobs",
            "1",
            "--out",
            str(out),
            "--report",
        ]
    )
    assert status == 0
    page = (out / "report.html").read_text()
    assert "http://" not in page and "https://" not in page  # no network needed
    sources = re.findall(r'<img src="([^"]+)"', page)
    assert len(sources) == 6  # band, ratio histogram, designs, sensitivity, margins, frequency
    for source in sources:
        assert source.startswith("data:image/png;base64,")
        data = base64.b64decode(source.split(",", 1)[1])
        assert data.startswith(PNG_SIGNATURE) and len(data) > 1000
    assert "management-of-change" in page
    for stem in ("plot-cv-band", "plot-iae-ratio", "plot-sensitivity", "plot-margins"):
        assert (out / f"{stem}.png").stat().st_size > 0
        assert (out / f"{stem}.svg").read_text().lstrip().startswith("<?xml")
    summary = json.loads((out / "summary.json").read_text())
    margins = summary["margins"]
    for key in ("gain_margin", "phase_margin", "delay_margin", "ms"):
        assert {"p5", "p50", "p95"} <= set(margins[key])
    assert set(margins["fraction_below_limits"]) == {
        "ms_above_2",
        "gain_margin_below_2",
        "phase_margin_below_30",
    }
    assert margins["nominal"]["stable"] is True
