"""How long the demo report takes to build, split into compute, pictures and PDF rendering.

The demo filter is trained on the Tideway Commons corpus before the clock
starts (training is not part of the report). Each step is timed on its own,
in the order ``nbledger report`` runs them, and its share of the total is
printed: *compute* (vocabulary review, assessment on the later messages,
ledgers of the example messages, and the JSON twin), *pictures* (every PNG
the report embeds), *HTML* (the templates) and *PDF* (WeasyPrint's layout
and writing). Rendering should not dominate because of oversized tables.

    python -m benchmarks.bench_report [--repeat 3]
"""

from __future__ import annotations

import argparse
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
CORPUS = ROOT / "demo_corpus"


def demo_inputs(folder: Path):
    """Train the demo filter as ``nbledger demo`` does; return the model, the later messages and the examples."""
    import subprocess
    import sys

    from explain.cli import run
    from explain.model.data_io import read_messages
    from explain.model.loading import load_model

    subprocess.run([sys.executable, str(CORPUS / "split.py"), "--out", str(folder)], check=True, capture_output=True)
    assert run(["train", str(folder / "train.csv"), "--text-col", "text", "--label-col", "label", "--normal-class",
                "ok", "--holdout", "0.2", "--seed", "7", "--out", str(folder / "tideway.skops")]) == 0
    return (
        load_model(folder / "tideway.skops"),
        read_messages(folder / "test.csv", "text", "label"),
        read_messages(CORPUS / "examples" / "explain.csv", "text"),
    )


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=3)
    args = parser.parse_args()

    from explain.analysis.report_contents import build_report
    from explain.analysis.risk import read_watchlist
    from explain.present.report_pages import draw_pictures, render_html, render_pdf
    from explain.present.report_json import dumps, to_json

    with tempfile.TemporaryDirectory() as tmp:
        model, data, examples = demo_inputs(Path(tmp))
    watchlist = read_watchlist(CORPUS / "examples" / "watchlist.txt")
    steps = ("compute", "pictures", "HTML", "PDF")
    best = dict.fromkeys(steps, float("inf"))
    for _ in range(args.repeat):
        t0 = time.perf_counter()
        report = build_report(model, data=data, explain=examples, watchlist=watchlist)
        twin = to_json(report)
        dumps(report)
        t1 = time.perf_counter()
        pictures = draw_pictures(report)
        t2 = time.perf_counter()
        page = render_html(report, twin, pictures)
        t3 = time.perf_counter()
        pdf = render_pdf(page, report.date.isoformat())
        t4 = time.perf_counter()
        for name, seconds in zip(steps, (t1 - t0, t2 - t1, t3 - t2, t4 - t3)):
            best[name] = min(best[name], seconds)
    total = sum(best.values())
    print(f"demo report: {len(data):,} labelled messages, {len(examples)} explained, "
          f"{len(pictures)} pictures, {len(page) / 1e6:.1f} MB HTML, {len(pdf) / 1e6:.1f} MB PDF "
          f"(best of {args.repeat})")
    for name in steps:
        print(f"  {name:<9} {best[name]:6.2f} s  {100 * best[name] / total:5.1f} %")
    print(f"  {'total':<9} {total:6.2f} s")


if __name__ == "__main__":
    main()
