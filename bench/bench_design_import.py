"""Benchmark: importing IPC-2581 design files of 1.3 MB and 100 MB (synthetic, made here).

The files are generated at bench time into a temporary directory and deleted after; none
is committed. They look like an exporter's output: a 6-layer stack-up, a drill layer with
a span and its holes, padstack holes, then most of the bytes as trace features on every
copper layer (which the import must stream past).

Each import runs in a fresh child process so its peak resident memory (ru_maxrss) is its
own; the same child's footprint after importing the code but before reading the file is
the reference beside it. Time is also reported against a bare `lxml.etree.iterparse` pass
over the same file in the same run (the floor no importer can beat).

    python bench/bench_design_import.py          # prints JSON
"""

from __future__ import annotations

import json
import random
import statistics
import subprocess
import sys
import tempfile
from pathlib import Path
from typing import Any

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

HEADER = """<?xml version="1.0" encoding="UTF-8"?>
<IPC-2581 revision="C" xmlns="http://webstds.ipc.org/2581">
  <Content roleRef="Owner"><FunctionMode mode="FABRICATION"/><StepRef name="bench"/></Content>
  <HistoryRecord number="1"><FileRevision fileRevisionId="1">
    <SoftwarePackage name="bench generator" revision="1" vendor="this project"/>
  </FileRevision></HistoryRecord>
  <Ecad name="Design">
    <CadHeader units="MILLIMETER">
      <Spec name="PREPREG"><General type="MATERIAL"><Property text="FR-4 prepreg"/></General></Spec>
      <Spec name="CORE"><General type="MATERIAL"><Property text="FR-4 core"/></General></Spec>
    </CadHeader>
    <CadData>
"""
STACK = [
    ("SMT", "SOLDERMASK", "TOP", 0.02, ""),
    ("L1", "SIGNAL", "TOP", 0.035, ""),
    ("P1", "DIELPREG", "INTERNAL", 0.2, "PREPREG"),
    ("L2", "PLANE", "INTERNAL", 0.035, ""),
    ("C1", "DIELCORE", "INTERNAL", 0.5, "CORE"),
    ("L3", "SIGNAL", "INTERNAL", 0.035, ""),
    ("P2", "DIELPREG", "INTERNAL", 0.2, "PREPREG"),
    ("L4", "SIGNAL", "INTERNAL", 0.035, ""),
    ("C2", "DIELCORE", "INTERNAL", 0.5, "CORE"),
    ("L5", "PLANE", "INTERNAL", 0.035, ""),
    ("P3", "DIELPREG", "INTERNAL", 0.2, "PREPREG"),
    ("L6", "SIGNAL", "BOTTOM", 0.035, ""),
    ("SMB", "SOLDERMASK", "BOTTOM", 0.02, ""),
]
COPPER = [name for name, function, *_ in STACK if function in ("SIGNAL", "PLANE")]


def write_design(path: Path, target_bytes: int, seed: int = 7) -> int:
    """Write a synthetic design file of about `target_bytes`; return its real size."""
    rng = random.Random(seed)
    with path.open("w", encoding="utf-8", newline="\n") as out:
        out.write(HEADER)
        for name, function, side, _, _ in STACK:
            out.write(f'      <Layer name="{name}" layerFunction="{function}" side="{side}"/>\n')
        out.write(
            '      <Layer name="DRILL_1-6" layerFunction="DRILL" side="ALL">'
            '<Span fromLayer="L1" toLayer="L6"/></Layer>\n'
        )
        out.write(
            '      <Stackup name="PRIMARY" overallThickness="1.85" whereMeasured="MASK">'
            '<StackupGroup name="G">\n'
        )
        for seq, (name, _, _, thickness, spec) in enumerate(STACK, start=1):
            ref = f'<SpecRef id="{spec}"/>' if spec else ""
            out.write(
                f'        <StackupLayer layerOrGroupRef="{name}" thickness="{thickness}" '
                f'sequence="{seq}">{ref}</StackupLayer>\n'
            )
        out.write("      </StackupGroup></Stackup>\n")
        out.write(
            '      <Step name="bench"><Datum x="0" y="0"/><Profile><Polygon>'
            '<PolyBegin x="0" y="0"/><PolyStepSegment x="160" y="0"/>'
            '<PolyStepSegment x="160" y="100"/><PolyStepSegment x="0" y="100"/>'
            '<PolyStepSegment x="0" y="0"/></Polygon></Profile>\n'
        )
        for i in range(200):
            x, y = rng.uniform(0, 160), rng.uniform(0, 100)
            out.write(
                f'        <PadStack net="N{i}"><LayerHole name="V{i}" diameter="0.3" '
                f'platingStatus="VIA" plusTol="0" minusTol="0" x="{x:.4f}" y="{y:.4f}">'
                '<Span fromLayer="L1" toLayer="L6"/></LayerHole>'
                f'<LayerPad layerRef="L1"><Location x="{x:.4f}" y="{y:.4f}"/>'
                '<StandardPrimitiveRef id="CIRCLE_1"/></LayerPad></PadStack>\n'
            )
        out.write('        <LayerFeature layerRef="DRILL_1-6">\n')
        for i in range(2000):
            x, y = rng.uniform(0, 160), rng.uniform(0, 100)
            out.write(
                f'          <Set net="N{i % 200}"><Hole name="H{i}" diameter="0.3" '
                f'platingStatus="VIA" plusTol="0" minusTol="0" x="{x:.4f}" y="{y:.4f}"/></Set>\n'
            )
        out.write("        </LayerFeature>\n")
        written = out.tell()
        per_layer = max((target_bytes - written) // len(COPPER), 0)
        for layer in COPPER:
            out.write(f'        <LayerFeature layerRef="{layer}">\n')
            start = out.tell()
            n = 0
            while out.tell() - start < per_layer:
                x, y = rng.uniform(0, 160), rng.uniform(0, 100)
                out.write(
                    f'          <Set net="N{n % 500}"><Features><Line startX="{x:.4f}" '
                    f'startY="{y:.4f}" endX="{x + 1.27:.4f}" endY="{y:.4f}">'
                    '<LineDescRef id="ROUND_0.15"/></Line></Features></Set>\n'
                )
                n += 1
            out.write("        </LayerFeature>\n")
        out.write("      </Step>\n    </CadData>\n  </Ecad>\n</IPC-2581>\n")
        return out.tell()


CHILD = r"""
import json, resource, sys, time
sys.path.insert(0, sys.argv[1])
from lxml import etree
from routing.builder.design_import import import_design, read_design
path, mode = sys.argv[2], sys.argv[3]
base_kb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
start = time.perf_counter()
cpu = time.process_time()
if mode == "import":
    result = import_design(read_design(path))
    assert result.spec["layers"] == 6, result.spec
else:
    for _, el in etree.iterparse(path, events=("end",), resolve_entities=False, no_network=True):
        el.clear(keep_tail=False)
        parent = el.getparent()
        if parent is not None:
            while el.getprevious() is not None:
                del parent[0]
seconds = time.perf_counter() - start
cpu = time.process_time() - cpu
peak_kb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
print(json.dumps({"s": seconds, "cpu_s": cpu, "peak_mb": peak_kb / 1024,
                  "base_mb": base_kb / 1024}))
"""


def _child(path: Path, mode: str) -> dict[str, float]:
    out = subprocess.run(
        [sys.executable, "-c", CHILD, str(ROOT), str(path), mode],
        capture_output=True,
        text=True,
        check=True,
        timeout=900,
    )
    return dict(json.loads(out.stdout.strip().splitlines()[-1]))


def run() -> dict[str, Any]:
    results: dict[str, Any] = {}
    with tempfile.TemporaryDirectory(prefix="bench-ipc2581-") as tmp:
        small = Path(tmp) / "small.xml"
        big = Path(tmp) / "big.xml"
        small_bytes = write_design(small, 1_300_000)
        big_bytes = write_design(big, 100_000_000)
        results["import_file_bytes_1mb"] = small_bytes
        results["import_file_bytes_100mb"] = big_bytes
        runs = [_child(small, "import") for _ in range(5)]
        bare_small = [_child(small, "bare") for _ in range(5)]
        results["import_ms_1mb"] = round(statistics.median(r["s"] for r in runs) * 1000, 1)
        results["import_cpu_ms_1mb"] = round(statistics.median(r["cpu_s"] for r in runs) * 1000, 1)
        results["import_bare_parse_ms_1mb"] = round(
            statistics.median(r["s"] for r in bare_small) * 1000, 1
        )
        imported = _child(big, "import")
        bare = _child(big, "bare")
        results["import_s_100mb"] = round(imported["s"], 2)
        results["import_cpu_s_100mb"] = round(imported["cpu_s"], 2)
        results["import_bare_parse_cpu_s_100mb"] = round(bare["cpu_s"], 2)
        results["import_peak_mb_100mb"] = round(imported["peak_mb"], 1)
        results["import_base_mb"] = round(imported["base_mb"], 1)
        results["import_bare_parse_s_100mb"] = round(bare["s"], 2)
        results["import_bare_parse_peak_mb_100mb"] = round(bare["peak_mb"], 1)
        results["import_to_bare_parse_ratio_100mb"] = round(imported["s"] / bare["s"], 2)
        real = _real_file()
        if real is not None:
            results["import_ms_real_tc9"] = round(
                statistics.median(_child(real, "import")["s"] for _ in range(3)) * 1000, 1
            )
    return results


def _real_file() -> Path | None:
    """The shared 1.3 MB exporter file, when this machine has it (timing only)."""
    for parent in [ROOT, *ROOT.parents]:
        candidate = parent / "shared" / "data" / "ipc2581" / "tc9-6layer-rev-c.xml"
        if candidate.is_file():
            return candidate
    return None


if __name__ == "__main__":
    print(json.dumps(run(), indent=2, sort_keys=True))
