"""The end-to-end demonstration behind ``plantcore demo``.

:func:`run_demo` takes a packaged example model (by default the four-zone curing oven of
:mod:`plantcore.examples`), and does what a user would do with their own model:

1. **inspect** it (Kalman parts, rank decisions with their margins, modes, verdicts);
2. **reduce** it: the minimal realization, then a balanced truncation to the lowest order
   whose guaranteed error is at most a tenth of the peak gain
   (:data:`plantcore.reports.html.DEFAULT_RELATIVE_ERROR`);
3. **compare**: certify that the minimal model has the same transfer function as the
   original, and measure the error of the truncated model against its bound;
4. **report**: write the self-contained HTML report;
5. **suggest**: rank candidate actuators for the modes the heaters cannot move (in the
   curing oven, zones 2 and 3 share one heater command, so the difference of their
   temperatures is uncontrollable) and recommend the set that separates them
   (:func:`plantcore.suggest_actuators`).

Everything is computed before anything is written; the files are then written into a hidden
folder next to the target and moved into place whole
(:func:`plantcore.files.output_folder.write_output_folder`), so no half-written folder is ever
left behind.  The target must not exist or be empty; with ``force=True`` (``plantcore demo
--force``) a folder holding only files the demo writes (:data:`DEMO_FILES`) is replaced whole,
and any other folder is still refused.  Only files
packaged with plantcore are read, through :mod:`importlib.resources`, so the demo works
offline right after ``pip install``.
"""

from __future__ import annotations

import datetime as _dt
import json
import os
from dataclasses import dataclass, field
from pathlib import Path

__all__ = ["DEMO_FILES", "SCENARIO_CANDIDATES", "DemoResult", "default_demo_folder", "run_demo"]

#: The files the demo writes, with what each holds.
DEMO_FILES = {
    "report.html": "the HTML report (open it in a web browser; it needs no network)",
    "inspection.txt": "the plain-text diagnosis (what `plantcore inspect` prints)",
    "original_model.toml": "a copy of the packaged model that was analysed",
    "minimal_model.toml": "the minimal realization (same transfer function)",
    "reduced_model.toml": "the balanced-truncated model (error within the bound)",
    "certificate.txt": "the equivalence certificate: original against minimal",
    "certificate.json": "the same certificate, machine-readable",
    "reduced_model_check.txt": "original against the reduced model: measured error",
    "placement.txt": "where to add an actuator: the candidates ranked, the recommended set",
}

#: Candidate actuators of our own scenario for a packaged example (state name -> gain, in the
#: units of B); other examples try one unit input at each state.
SCENARIO_CANDIDATES = {
    "thermal_process": {
        "zone 2 heater on its own command": {"zone2_air_temp_degC": 0.05},
        "zone 3 heater on its own command": {"zone3_air_temp_degC": 0.05},
        "booster for zones 2 and 3 on the shared command": {"zone2_air_temp_degC": 0.05,
                                                            "zone3_air_temp_degC": 0.05},
        "zone 1 trim heater": {"zone1_air_temp_degC": 0.05},
    },
}


def _scenario_candidates(example: str, model):
    """The example's candidate columns (name -> list of n gains), or None for the default."""
    table = SCENARIO_CANDIDATES.get(example)
    if table is None:
        return None
    position = {name: i for i, name in enumerate(model.states)}
    out = {}
    for name, gains in table.items():
        column = [0.0] * model.n
        for state, gain in gains.items():
            column[position[state]] = gain
        out[name] = column
    return out


@dataclass(frozen=True)
class DemoResult:
    """What :func:`run_demo` did.

    Attributes
    ----------
    folder : pathlib.Path
        The folder the files were written to.
    files : dict
        File name -> path of every file written (the keys of :data:`DEMO_FILES`, less
        ``reduced_model*`` files when no reduction was possible).
    contents : plantcore.reports.html.ReportContents
        The analysis, reduction and certificates shown in the report.
    summary : str
        The short summary that was printed.
    """

    folder: Path
    files: dict = field(repr=False)
    contents: object = field(repr=False)
    summary: str = field(repr=False)


def default_demo_folder(base=".", now=None) -> Path:
    """``plantcore-demo-YYYYMMDD-HHMMSS`` inside ``base`` (the name only; nothing created)."""
    now = now or _dt.datetime.now()
    return Path(base) / f"plantcore-demo-{now:%Y%m%d-%H%M%S}"


def _check_folder(folder, *, force: bool = False, inputs=()) -> Path | None:
    """Refuse a folder the demo may not write into (before any work is done).

    None (a new time-stamped folder) is always accepted; otherwise the folder policy of
    :func:`plantcore.files.output_folder.check_output_folder_policy` with the demo's files.
    """
    from plantcore.files.output_folder import check_output_folder_policy

    if folder is None:
        return None
    return check_output_folder_policy(os.fsdecode(os.fspath(folder)), DEMO_FILES, force=force,
                                      inputs=inputs, owner="the demo")


def _new_default_folder() -> Path:
    """Reserve a new folder ``plantcore-demo-YYYYMMDD-HHMMSS`` in the working directory (a
    suffix ``-2``, ``-3``, ... avoids a clash); it stays empty until the demo moves in."""
    base = default_demo_folder()
    for k in range(1, 100):
        path = base if k == 1 else base.with_name(f"{base.name}-{k}")
        try:
            path.mkdir()
        except FileExistsError:
            continue
        return path
    raise ValueError(f"{base}: could not find a new folder name; give one with -o.")  # pragma: no cover


def _placement_line(s) -> str:
    """One line on the actuator suggestion."""
    from plantcore.core.wording import short_number, shown_value

    if not s.deficient_modes and not s.narrow_modes:
        return "every mode can be moved by the inputs; no actuator to add"
    best = s.ranking[0] if s.ranking else None
    text = f"{len(s.deficient_modes)} modes the inputs cannot move"
    if best is not None and best.restored:
        text += (f"; '{best.name}' restores {best.restored} (margin "
                 f"{short_number(shown_value(best.restored_margin))})")
    if s.recommended and s.reaches_goal:
        text += f"; recommended: {', '.join(s.recommended)}"
    elif s.unreachable_modes:
        k = len(s.unreachable_modes)
        text += (f"; {k} {'mode stays' if k == 1 else 'modes stay'} out of reach of these "
                 "candidates (see placement.txt)")
    return text


def _summary(c, example: str, folder: Path, written: dict, placement=None) -> str:
    from plantcore.reports.html import PART_LABELS

    a = c.analysis
    m = c.model
    domain = "continuous time" if not m.is_discrete else f"discrete time, sample time {m.dt:g}"
    margins = [d.margin for d in a.decisions]
    smallest = min(margins) if margins else float("inf")
    lines = [f"plantcore demo: {m.name or example}",
             (f"  model       {m.n} states, {m.n_inputs} inputs, {m.n_outputs} outputs, {domain} "
              f"(packaged example '{example}')"),
             "  parts       " + "; ".join(f"{s} {PART_LABELS[p]}" for p, s in
                                          zip(PART_LABELS, a.sizes)),
             f"  decisions   {len(a.decisions)} rank decisions, smallest margin {smallest:.3g} "
             + ("(FRAGILE: the answer depends on the tolerance)" if a.fragile else "(clear)"),
             (f"  verdicts    stabilizable: {'yes' if a.stabilizable else 'no'}, "
              f"detectable: {'yes' if a.detectable else 'no'}, "
              f"near cancellations: {len(a.narrow_modes)}")]
    mr = a.minimal
    cert = c.certificate
    verdict = ("not checked" if cert is None else
               cert.verdict.upper()
               + f" (relative peak error {cert.relative_error:.2g})")
    lines.append(f"  minimal     {m.n} -> {mr.order} states ({mr.removed_uncontrollable} "
                 f"uncontrollable, {mr.removed_unobservable} unobservable removed); "
                 f"certificate: {verdict}")
    red = c.reduction
    if red is not None:
        measured = c.reduced_certificate.peak_error if c.reduced_certificate is not None else None
        gain = f" (peak gain {c.peak_gain.value:.3g})" if c.peak_gain is not None else ""
        lines.append(f"  reduced     {mr.order} -> {red.order} states by balanced truncation; "
                     f"error bound {red.error_bound:.3g}, measured "
                     f"{'n/a' if measured is None else f'{measured:.3g}'}{gain}")
    else:
        lines.append(f"  reduced     none: {c.reduction_problem}")
    if placement is not None:
        lines.append("  placement   " + _placement_line(placement))
    lines.append(f"  written to  {folder}{os.sep}")
    width = max(len(k) for k in written)
    for name in written:
        lines.append(f"    {name:<{width}}  {DEMO_FILES[name]}")
    return "\n".join(lines)


def _written_models(contents):
    """The minimal and reduced models as written (rounding dust within the backward error
    as exact zeros, :mod:`plantcore.files.written_zeros`), and the contents with their
    certificates run on what is written."""
    import dataclasses

    from plantcore.files.written_zeros import (
        a_priori_backward_error,
        clear_rounding_dust,
        reduction_backward_error,
    )
    from plantcore.reduction.equivalence import check_equivalence

    model = contents.model
    a = contents.analysis
    eta = max(reduction_backward_error(a.decomposition, model.n),
              reduction_backward_error(a.minimal, model.n))
    minimal = clear_rounding_dust(contents.minimal_model, eta, reference=model)
    models = {"minimal_model.toml": minimal.model}
    changes = {}
    if minimal.cleared and contents.certificate is not None:
        changes["certificate"] = check_equivalence(model, minimal.model,
                                                   reference_peak_gain=contents.peak_gain)
    if contents.reduction is not None:
        reduced = clear_rounding_dust(contents.reduction.model,
                                      a_priori_backward_error(contents.reduction.model.n),
                                      reference=model)
        models["reduced_model.toml"] = reduced.model
        if reduced.cleared and contents.reduced_certificate is not None:
            changes["reduced_certificate"] = check_equivalence(
                model, reduced.model, reference_peak_gain=contents.peak_gain)
    return dataclasses.replace(contents, **changes), models


def run_demo(folder=None, *, example: str = "thermal_process", tol=None, echo=print,
             progress=None, force: bool = False) -> DemoResult:
    """Inspect, reduce, certify and report a packaged example, writing every result.

    Parameters
    ----------
    folder : str or os.PathLike, optional
        Where to write; it must not exist yet, or be empty (unless ``force``).  Default: a new
        folder ``plantcore-demo-YYYYMMDD-HHMMSS`` in the working directory.
    example : str, optional
        Which packaged example (see :func:`plantcore.list_examples`).
    tol : float, optional
        Relative rank tolerance (default as in :mod:`plantcore.core.rank`).
    echo : callable or None, optional
        Called with the summary text (default :func:`print`); None for silence.
    progress : bool or None, optional
        Progress on standard error: None (default) when it is a terminal.
    force : bool, default False
        Replace an existing folder whole, but only when it holds nothing except regular files
        with names of :data:`DEMO_FILES` (the output of an earlier demo, of any example);
        a folder with anything else in it (another file, a subfolder, a symbolic link) is
        refused.  The new files are written into a hidden folder next to the target first,
        and the old folder is put back if the replacement fails or is interrupted.

    Returns
    -------
    DemoResult

    Raises
    ------
    ValueError
        Unknown example, or a folder that exists and is not empty (without ``force``), or holds
        anything but the demo's files (with ``force``); nothing is written.

    Examples
    --------
    >>> import os, tempfile
    >>> out = os.path.join(tempfile.mkdtemp(), "demo")
    >>> result = run_demo(out, echo=None, progress=False)
    >>> sorted(result.files) == sorted(DEMO_FILES)
    True
    >>> result.contents.certificate.equivalent
    True
    """
    from plantcore.analysis import collect_report
    from plantcore.examples import example_path
    from plantcore.files import atomic_write_text, load_model, save_model
    from plantcore.files.output_folder import write_output_folder
    from plantcore.reports.html import render_html
    from plantcore.structure.placement import suggest_actuators

    source = example_path(example)            # ValueError for an unknown example
    model = load_model(source)
    _check_folder(folder, force=force, inputs=(source,))  # refuse before any work
    contents = collect_report(model, tol=tol, source=os.path.basename(source), progress=progress)
    contents, written_models = _written_models(contents)
    placement = suggest_actuators(model, _scenario_candidates(example, model), tol=tol)
    html_text = render_html(contents, progress=progress)
    inspection = contents.analysis.to_text()
    cert = contents.certificate
    texts = {"report.html": html_text, "inspection.txt": inspection + "\n",
             "placement.txt": placement.to_text()}
    if cert is not None:
        texts["certificate.txt"] = cert.to_text() + "\n"
        texts["certificate.json"] = json.dumps(cert.to_dict(), indent=2, allow_nan=False) + "\n"
    if contents.reduced_certificate is not None:
        texts["reduced_model_check.txt"] = contents.reduced_certificate.to_text() + "\n"
    models = {"original_model.toml": model, **written_models}

    def fill(staging: Path) -> list:
        names = []
        for name in DEMO_FILES:
            if name in models:
                save_model(models[name], staging / name, inputs=(source,))
            elif name in texts:
                atomic_write_text(staging / name, texts[name], inputs=(source,))
            else:
                continue
            names.append(name)
        return names

    created = folder is None
    path = _new_default_folder() if created else Path(os.fsdecode(os.fspath(folder)))
    try:
        names = write_output_folder(path, fill, DEMO_FILES, force=force, inputs=(source,),
                                    owner="the demo")
    except BaseException:  # a failure, Ctrl-C or SIGTERM: no reserved folder is left either
        if created:
            try:
                path.rmdir()
            except OSError:
                pass
        raise
    written = {name: path / name for name in names}
    summary = _summary(contents, example, path, written, placement)
    if echo is not None:
        echo(summary)
    return DemoResult(path, written, contents, summary)
