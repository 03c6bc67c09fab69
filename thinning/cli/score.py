"""``thinning score``: the figures of one layout file."""

from __future__ import annotations

import json

import click

from . import cli
from ._options import check_angle, check_exponent, check_frequency

__all__ = ["score"]


def _sites_text(r: dict) -> str:
    """M and how it was found, from ``sites_basis``."""
    from ..analysis.score import SITES_BASIS

    m = "unlimited" if r["sites"] is None else f"{r['sites']}"
    return f"{m} ({SITES_BASIS.get(r.get('sites_basis'), 'given')})"


def format_table(r: dict) -> str:
    """The readable table of a score (``thinning score`` without ``--json``)."""

    def num(v, fmt):
        return "n/a" if v is None else format(v, fmt)

    def pair(v, fmt=".2f"):
        return " / ".join(num(x, fmt) for x in v)

    rows = [
        ("elements", f"{r['elements']}"),
        ("candidate sites (M)", _sites_text(r)),
        ("fill", "n/a" if r["fill"] is None else f"{100 * r['fill']:.1f} %"),
        ("frequency", f"{r['frequency_ghz']:g} GHz"),
        ("scan cone", f"{r['scan_max_deg']:g} deg half-angle"),
        ("element pattern", f"cos^{r['element_exponent']:g}(theta)"),
        ("PSL (refined)", f"{num(r['psl_db'], '.2f')} dB at (u, v) = ({pair(r['psl_uv'], '.4f')})"),
        ("PSL (best sample)", f"{num(r['psl_sampled_db'], '.2f')} dB"),
        ("ASL", f"{num(r['asl_db'], '.2f')} dB"),
        ("ASL, random thinning", f"{num(r['expected_asl_db'], '.2f')} dB (expected)"),
        ("directivity", f"{num(r['directivity_dbi'], '.2f')} dBi"),
        ("cell-gain rule", f"{num(r['pi_n_dbi'], '.2f')} dBi  [{r['cell_gain_basis']}]"),
        ("difference", f"{num(r['directivity_minus_pi_n_db'], '+.2f')} dB"),
        ("HPBW broadside x-z / y-z", f"{pair(r['hpbw_deg'])} deg"),
        ("HPBW at scan edge x-z / y-z", f"{pair(r['hpbw_scan_deg'])} deg"),
        ("HPBW, widest beam", f"{num(r.get('hpbw_widest_deg'), '.2f')} deg"),
        ("grating lobes in cone", "yes" if r["grating_lobes"] else "no"),
        (
            "pattern evaluation",
            f"{r['evaluation']['engine']}, {r['evaluation']['lobes_refined']} lobes refined",
        ),
    ]
    if r.get("scan_set", {}).get("kind") == "sector":
        sc = r["scan_set"]
        rows.insert(
            5,
            (
                "scan sector",
                f"azimuth {sc['azimuth_deg'][0]:g} to {sc['azimuth_deg'][1]:g} deg, elevation "
                f"{sc['elevation_deg'][0]:g} to {sc['elevation_deg'][1]:g} deg",
            ),
        )
    if r.get("band_ghz"):
        lo, hi = r["band_ghz"]
        rows.insert(5, ("band", f"{lo:g} to {hi:g} GHz, {r['steering']} steering"))
    if r.get("mask"):
        rows.append(("mask margin", f"{num(r['mask'].get('margin_db'), '+.2f')} dB (worst beam)"))
    if r.get("gain_dbi") is not None:
        rows.append(("gain (embedded pattern)", f"{num(r['gain_dbi'], '.2f')} dBi"))
        rows.append(("largest scan loss", f"{num(r['scan_loss_max_db'], '.2f')} dB"))
    if r.get("requirements"):
        from ..analysis.requirements import verdict_phrase

        for key, v in r["requirements"].items():
            rows.append(("requirement", verdict_phrase(key, v, plain=True)))
    w = max(len(k) for k, _ in rows)
    lines = [f"{k:<{w}}  {v}" for k, v in rows]
    lines.append(
        "PSL, ASL and HPBW are array-factor figures (isotropic elements); PSL and ASL over the "
        "disc |(u, v)| <= 1 + sin(scan)."
    )
    return "\n".join(lines)


class _StageProgress:
    """Prints each stage of a long score on stderr, with the time it took; on a terminal the
    running stage's elapsed time ticks every second."""

    def __init__(self):
        import sys
        import threading
        import time

        self._sys, self._time, self._threading = sys, time, threading
        self.tty = sys.stderr.isatty()
        self.stage = None
        self.t0 = self.start = time.perf_counter()
        self._stop = threading.Event()
        self._ticker = None

    def __call__(self, text):
        self._finish_stage()
        self.stage, self.t0 = text, self._time.perf_counter()
        self._sys.stderr.write(f"thinning score: {text} …" + ("" if self.tty else "\n"))
        self._sys.stderr.flush()
        if self.tty and self._ticker is None:
            self._ticker = self._threading.Thread(target=self._tick, daemon=True)
            self._ticker.start()

    def _tick(self):
        while not self._stop.wait(1.0):
            if self.stage is not None:
                dt = self._time.perf_counter() - self.t0
                self._sys.stderr.write(f"\rthinning score: {self.stage} … {dt:.0f} s")
                self._sys.stderr.flush()

    def _finish_stage(self):
        if self.stage is None:
            return
        dt = self._time.perf_counter() - self.t0
        end = f"\rthinning score: {self.stage}: {dt:.1f} s\n" if self.tty else ""
        if not self.tty:
            end = f"thinning score: {self.stage}: done in {dt:.1f} s\n"
        self._sys.stderr.write(end)
        self._sys.stderr.flush()
        self.stage = None

    def close(self):
        self._stop.set()
        self._finish_stage()


@cli.command()
@click.argument("layout_csv", metavar="LAYOUT.csv", type=click.Path(dir_okay=False))
@click.option(
    "--spec",
    "spec_path",
    type=click.Path(dir_okay=False),
    default=None,
    help="Spec the layout was designed from: its candidate sites (for the fill and the "
    "random-thinning expectation), frequency, scan cone or sector, band, requirements (the "
    "mask), element pattern and oversampling, unless given here; the figures then equal "
    "the design's layout.json.",
)
@click.option(
    "--freq-ghz",
    type=float,
    default=None,
    callback=check_frequency,
    help="Design frequency [GHz] (required without --spec).",
)
@click.option(
    "--scan-max-deg",
    type=float,
    default=None,
    callback=check_angle,
    help="Half-angle of the scan cone [deg]  [default: the spec's, or 0].",
)
@click.option(
    "--element-exponent",
    type=float,
    default=None,
    callback=check_exponent,
    help="Element power pattern cos^Q(theta); 0 = isotropic  [default: the spec's, or 1].",
)
@click.option(
    "--sites",
    type=click.IntRange(min=1),
    default=None,
    help="Candidate sites M the layout was thinned from (for the fill and the expected ASL), "
    "when there is no spec; without either, M is the layout's own lattice inside the convex "
    "hull of its elements.",
)
@click.option(
    "--oversampling",
    type=click.FloatRange(min=2.0, max=32.0),
    default=None,
    help="Pattern samples per null width, per axis  [default: the spec's, or 4].",
)
@click.option("--json", "as_json", is_flag=True, help="Print one JSON object instead of a table.")
def score(
    layout_csv,
    spec_path,
    freq_ghz,
    scan_max_deg,
    element_exponent,
    sites,
    oversampling,
    as_json,
):
    """Score a layout: PSL, ASL, directivity, beamwidth and grating lobes."""
    from ..analysis.score import score_layout
    from ..errors import LayoutError
    from ..io.layout_csv import read_layout_csv
    from ..units import deg_to_rad, ghz_to_hz

    layout = read_layout_csv(layout_csv)
    spec = None
    if spec_path is not None:
        from ..spec import load_spec

        spec = load_spec(spec_path)
        if sites is not None:
            raise click.UsageError("give --sites or --spec, not both (the spec has the sites)")
    elif freq_ghz is None:
        raise click.UsageError("give --freq-ghz (or --spec, whose frequency is used)")
    if sites is not None and sites < len(layout):
        raise LayoutError(
            f"--sites {sites}: fewer candidate sites than the {len(layout)} "
            f"elements in {layout_csv}"
        )
    frequency = ghz_to_hz(freq_ghz) if freq_ghz is not None else spec.frequency
    scan = deg_to_rad(scan_max_deg) if scan_max_deg is not None else 0.0
    if scan_max_deg is None and spec is not None:
        scan = spec.scan_max
    q = element_exponent if element_exponent is not None else 1.0
    if element_exponent is None and spec is not None:
        q = spec.element_exponent
    over = oversampling if oversampling is not None else 4.0
    if oversampling is None and spec is not None:
        over = spec.oversampling
    candidates = spec.sites() if spec is not None else sites
    extra = {}
    if spec is not None:  # the spec's scan set, band, mask and element pattern
        extra = spec.score_options(len(layout))
        if scan_max_deg is not None:
            extra["coverage"] = None
        if element_exponent is not None:
            extra["element"] = None
        if freq_ghz is not None:
            extra["coverage"] = extra["limits"] = None
    progress = _StageProgress()  # stages of a long direct summation, on stderr
    try:
        result = score_layout(
            layout,
            frequency,
            scan,
            q,
            sites=candidates,
            oversampling=over,
            progress=progress,
            **extra,
        ).to_dict()
    finally:
        progress.close()
    if spec is not None and spec.requirements:
        from ..analysis.requirements import judge

        result["requirements"] = judge(spec.requirements, result)
    if as_json:
        click.echo(json.dumps(result, allow_nan=False))
    else:
        click.echo(format_table(result))
