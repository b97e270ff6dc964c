"""Command line only: parse, call the pipeline, print, exit codes.

Exit status: 0 done (a failing design is a result, not an error); 2 a problem with the
input, printed without a traceback; 1 an internal error (a bug, with its traceback).
"""

from __future__ import annotations

import argparse
import os
import shlex
import signal
import sys
import threading
from contextlib import contextmanager
from pathlib import Path

from . import __version__
from .errors import InputError
from .probability_text import probability


def _positive_int(text: str) -> int:
    try:
        v = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a whole number, found '{text}'") from None
    if v < 1:
        raise argparse.ArgumentTypeError(f"expected a whole number of at least 1, found '{text}'")
    return v


def _seed(text: str) -> int:
    try:
        v = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a whole number, found '{text}'") from None
    if v < 0:
        raise argparse.ArgumentTypeError(f"expected a seed of 0 or more, found '{text}'")
    return v


class _Parser(argparse.ArgumentParser):
    def error(self, message):  # usage mistakes are input problems: exit 2, as argparse does
        self.print_usage(sys.stderr)
        self.exit(2, f"{self.prog}: error: {message}\n")


def build_parser() -> argparse.ArgumentParser:
    p = _Parser(prog="egressmargin", description="Compare available and required safe egress times (ASET/RSET) "
                "from fire-simulation histories, with model-uncertainty bands, and write a submittal report.")
    p.add_argument("--version", action="version", version=f"egressmargin {__version__}")
    sub = p.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)

    def run_opts(sp, default_out: str):
        sp.add_argument("--out", type=Path,
                        help=f"output folder (default: {default_out}); written only when it is new, empty or an "
                        "earlier egressmargin output, never a folder holding the study's files")
        sp.add_argument("--force", action="store_true",
                        help="--out is an earlier egressmargin output that also holds other files: replace only "
                        "egressmargin's own files and keep the others")
        sp.add_argument("--samples", type=_positive_int, help="Monte Carlo draws (overrides the study)")
        sp.add_argument("--seed", type=_seed, help="random seed (overrides the study)")
        sp.add_argument("--no-pdf", action="store_true",
                        help="numbers only: write results.json, no report (add --html for report.html)")
        sp.add_argument("--html", action="store_true", help="with --no-pdf: still write report.html")
        sp.add_argument("--quiet", action="store_true", help="no progress messages")
        sp.add_argument("--jobs", type=_positive_int, help="processes over scenarios (default: automatic)")

    r = sub.add_parser("run", help="run the whole pipeline on a study")
    r.add_argument("study", type=Path)
    run_opts(r, "<study stem>-out in the current folder")
    r.add_argument("--uncertainty", type=Path, help="use this model-uncertainty file instead of the study's")
    r.add_argument("--raw-only", action="store_true",
                   help="ignore any model-uncertainty file: assess the uncorrected predictions only")
    r.add_argument("--criteria", metavar="NAME|FILE",
                   help="use this criteria set (a bundled name or a criteria file, relative to the current "
                        "folder) instead of the study's; recorded in results.json")
    d = sub.add_parser("demo", help="run the bundled demo study (an invented building, illustrative data)")
    run_opts(d, "./egressmargin-demo")
    v = sub.add_parser("validate", help="check a study and every file it names, without computing")
    v.add_argument("study", type=Path)
    v.add_argument("--explain", action="store_true",
                   help="also print, per route, each element's effective width, density, speed, specific flow "
                        "and capacity from the study alone (the hand calculation to check before a run)")
    f = sub.add_parser("fit-uncertainty", help="derive a model-uncertainty table from measured/predicted pairs")
    f.add_argument("pairs", type=Path)
    f.add_argument("--out", type=Path, help="YAML table to write (default: print it)")
    f.add_argument("--plot", type=Path, help="fit figure: ratio against size and normal quantiles (.svg, .png or .pdf)")
    f.add_argument("--force", action="store_true", help="replace an existing --out or --plot file")
    f.add_argument("--source", default=None, help="the table's source line (default: names the pairs file)")
    f.add_argument("--sigma-exp", type=float, default=None,
                   help="experimental relative standard deviation for rows without a sigma_exp column")
    f.add_argument("--basis", action="append", default=[], metavar="QUANTITY=BASIS",
                   help="what a quantity's values are when the pairs file does not say: rise, depletion or "
                        "as-given (e.g. temperature=rise); repeat per quantity")
    cmp = sub.add_parser("compare", help="compare several runs of one study side by side (what-ifs)")
    cmp.add_argument("results", type=Path, nargs="+", metavar="RESULTS.json",
                     help="results.json files; the first is the baseline")
    cmp.add_argument("--out", type=Path, default=Path("egressmargin-compare"),
                     help="output folder (default: ./egressmargin-compare)")
    cmp.add_argument("--no-pdf", action="store_true", help="write comparison.json and comparison.html, no PDF")
    cmp.add_argument("--allow-different-titles", action="store_true",
                     help="compare runs whose study titles differ (e.g. two design options)")
    c = sub.add_parser("criteria", help="list the bundled criteria sets, or print one with its sources")
    c.add_argument("name", nargs="?")
    return p


class Stopped(BaseException):
    """SIGTERM, raised in the main thread as KeyboardInterrupt is for SIGINT (so cleanup runs)."""


def _raise_stopped(signum, frame):
    import multiprocessing
    for child in multiprocessing.active_children():   # this run's scenario workers: stop them now,
        child.kill()                                  # rather than wait for their scenarios to finish
    raise Stopped(signum)


@contextmanager
def _sigterm_raises():
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    previous = signal.signal(signal.SIGTERM, _raise_stopped)
    try:
        yield
    finally:
        signal.signal(signal.SIGTERM, previous)


#: Exit status after a signal: 128 + the signal number (shell convention).
EXIT_SIGINT, EXIT_SIGTERM, EXIT_SIGPIPE = 128 + 2, 128 + 15, 128 + 13


def _relative_arg(arg) -> str:
    """A command-line argument as the manifest records it: an absolute path (alone or after
    ``--opt=``) relative to the current folder; anything else as given."""
    import os

    text = str(arg)
    head, sep, value = text.partition("=") if text.startswith("--") else ("", "", text)
    if not os.path.isabs(value):
        return text
    try:
        rel = os.path.relpath(value, os.getcwd())
    except ValueError:          # another drive (Windows): keep the name only
        rel = os.path.basename(value)
    return f"{head}{sep}{rel}"


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    argv = sys.argv[1:] if argv is None else list(argv)
    args = parser.parse_args(argv)
    if args.command is None:
        parser.print_help()
        return 2
    # recorded in the output's manifest: absolute paths written relative to the current
    # folder, so no absolute path of the machine reaches an output (issue 23)
    args.command_line = shlex.join(["egressmargin", *[_relative_arg(a) for a in argv]])
    try:
        with _sigterm_raises():
            status = {"run": _run, "demo": _demo, "validate": _validate, "fit-uncertainty": _fit,
                      "criteria": _criteria, "compare": _compare}[args.command](args)
            sys.stdout.flush()
        return status
    except InputError as exc:
        print(str(exc), file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print(f"egressmargin: stopped (SIGINT); {_after_stop(args.command)}", file=sys.stderr)
        return EXIT_SIGINT
    except Stopped:
        print(f"egressmargin: stopped (SIGTERM); {_after_stop(args.command)}", file=sys.stderr)
        return EXIT_SIGTERM
    except BrokenPipeError:
        # the reader of stdout went away (``| head``): stop quietly, as a pipe's writer does
        _silence_stdout()
        return EXIT_SIGPIPE


#: Commands that write nothing: stopping them leaves nothing to remove.
READ_ONLY_COMMANDS = ("validate", "criteria")


def _after_stop(command: str) -> str:
    """What a stopped command left behind, in words."""
    return "nothing was written" if command in READ_ONLY_COMMANDS else "unfinished output removed"


def _silence_stdout() -> None:
    """Point stdout at /dev/null so the interpreter's last flush does not fail again."""
    try:
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
    except (OSError, ValueError):
        pass


def _progress(quiet: bool):
    if quiet:
        return None
    from .progress import Progress
    return Progress(sys.stderr)


def _options(args, **extra):
    """RunOptions from the options ``run`` and ``demo`` share."""
    from .pipeline import RunOptions
    return RunOptions(out=args.out, samples=args.samples, seed=args.seed, pdf=not args.no_pdf,
                      html=not args.no_pdf or args.html, workers=args.jobs, force=args.force,
                      command=args.command_line, progress=_progress(args.quiet), **extra)


def _run(args) -> int:
    from .pipeline import run
    options = _options(args, uncertainty=args.uncertainty, raw_only=args.raw_only, criteria=args.criteria)
    out = run(args.study, options)
    _report_run(out, options.notices)
    return 0


def _demo(args) -> int:
    from .pipeline import run
    from .resources import resource_dir
    study = resource_dir("demo") / "study.yaml"
    args.out = args.out or Path("egressmargin-demo")
    options = _options(args)
    out = run(study, options)
    _report_run(out, options.notices)
    return 0


def _report_run(out: Path, notices=()) -> None:
    """Read results.json once: its warnings (those ``validate`` prints) on stderr, the summary on stdout;
    then ``notices`` (what the run could not tidy beside the output) on stderr."""
    import json
    res = json.loads((out / "results.json").read_text(encoding="utf-8"))
    for w in [*(res.get("warnings") or []), *map(str, notices)]:
        print(w, file=sys.stderr)
    _summary(out, res)


def _table(rows) -> None:
    """Rows printed as left-aligned columns."""
    widths = [max(len(str(r[i])) for r in rows) for i in range(len(rows[0]))]
    for r in rows:
        print("  ".join(str(x).ljust(w) for x, w in zip(r, widths)))


def _summary(out: Path, res: dict) -> None:

    def t(x):
        return "> end" if x is None else f"{x:.0f}"
    rows = [("scenario", "route", "RSET p50", "ASET p50", "margin p05", "p_fail", "verdict")]
    for sc in res["scenarios"]:
        for r in sc["routes"]:
            margin = r["margin_s"]["p05"]
            at_least = (r.get("margin_at_least_s") or {}).get("p05")
            if margin is not None:
                margin_text = f"{margin:.0f}"
            elif at_least is not None:
                margin_text = f">= {at_least:.0f}"       # no limit reached by the end: a lower bound
            else:
                margin_text = "unknown"                  # e.g. no detection, or both beyond the data
            rset_p50 = r["rset_s"]["p50"]
            rset_text = ("not detected" if rset_p50 is None and (r.get("share_not_detected") or 0) >= 0.5
                         else t(rset_p50))
            rows.append((sc["id"], r["id"], rset_text, t(r["aset_s"]["p50"]),
                         margin_text, probability(r["p_fail"], r.get("p_fail_ci95")),
                         r["verdict"].upper() + ("" if r.get("criteria_assessed", True) else " (nothing assessed)")))
        if not sc["routes"]:
            for loc in sc["locations"]:
                rows.append((sc["id"], f"[{loc['id']}]", "", t(loc["aset_s"]["p50"]), "", "", loc["governing"] or ""))
    _table(rows)
    design = res.get("design")
    if isinstance(design, dict) and design.get("routes"):
        weights = ", ".join(f"{k} {v:g}" for k, v in (design.get("weights") or {}).items())
        print(f"\ndesign level, over the weighted design fires ({weights}):")
        _table([("route", "p_fail", "verdict")] + [(r["id"], probability(r["p_fail"], r.get("p_fail_ci95")),
                                                    r["verdict"].upper()) for r in design["routes"]])
    pdf = out / "report.pdf"
    print(f"\nresults: {out / 'results.json'}")
    if pdf.exists():
        print(f"report:  {pdf}")
    print("The analysis supports, and does not replace, the judgment of a qualified fire engineer; "
          "local codes and the approving authority govern.")


def _validate(args) -> int:
    from .pipeline import load
    from .paths import relative_text
    loaded = load(args.study)
    for w in loaded.warnings:       # as `run` prints them (from results.json): paths relative to the study file
        print(relative_text(str(w), loaded.study.base_dir), file=sys.stderr)
    scenarios = loaded.study.scenarios
    per = sorted({len(s.locations) for s in scenarios})
    n_ids = len({loc.id for s in scenarios for loc in s.locations})
    # locations counted once: per scenario (scenarios often share one list) and distinct ids
    n_loc = (f"{per[0]} location{'s' if per[0] != 1 else ''} per scenario" if len(per) == 1
             else f"{per[0]} to {per[-1]} locations per scenario") + \
        (f" ({n_ids} distinct)" if len(scenarios) > 1 and n_ids != per[-1] else "")
    print(f"{args.study}: OK — {len(scenarios)} scenario{'s' if len(scenarios) != 1 else ''}, {n_loc}, "
          f"{len(loaded.study.routes)} route{'s' if len(loaded.study.routes) != 1 else ''}, criteria '{loaded.study.criteria.name}', "
          f"{'model uncertainty from ' + str(loaded.table.path) if loaded.table else 'no model-uncertainty table'}")
    for cid, why in loaded.study.criteria.not_applicable.items():
        print(f"  criterion '{cid}' not applicable: {why}")
    if getattr(args, "explain", False):
        from .egress.summary import explain_text
        print()
        print(explain_text(loaded.study))
    return 0


def _fit(args) -> int:
    from datetime import date

    from . import uncertainty_fit as uf
    from .errors import Problem, raise_if_any
    problems = uf.output_problems(args.pairs, args.out, args.plot, force=args.force)
    basis = {}
    for item in args.basis:
        q, sep, word = item.partition("=")
        if not sep or not q.strip() or not word.strip():
            problems.append(Problem(f"--basis {item}", "expected QUANTITY=BASIS, e.g. temperature=rise"))
        else:
            basis[q.strip().lower()] = word.strip().lower()
    raise_if_any(problems)
    pairs = uf.read_pairs(args.pairs, default_sigma_exp=args.sigma_exp, basis=basis)
    source = args.source or f"fitted from the measured/predicted pairs in {args.pairs.name}"
    table = uf.fit_table(pairs, source, date.today().isoformat())
    for q, ws in (table.get("fitted", {}).get("warnings") or {}).items():
        for w in ws:
            print(f"{args.pairs}: warning: {q}: {w}", file=sys.stderr)
    if args.plot:
        from .uncertainty_plot import plot_fit
        plot_fit(pairs, table, args.plot)
    if args.out:
        uf.write_table(table, args.out)
        print(f"wrote {args.out}")
    else:
        import yaml
        print(yaml.safe_dump(table, sort_keys=False), end="")
    if args.plot:
        print(f"wrote {args.plot}")
    return 0


def _compare(args) -> int:
    from datetime import date

    from .compare import build_comparison, read_comparable
    from .report.compare_render import write_comparison
    runs = read_comparable(args.results, allow_different_titles=args.allow_different_titles)
    comparison = build_comparison(runs, allow_different_titles=args.allow_different_titles)
    notices: list = []
    paths = write_comparison(comparison, args.out, pdf=not args.no_pdf, generated=date.today().isoformat(),
                             command=args.command_line, notices=notices)
    for w in notices:
        print(str(w), file=sys.stderr)
    for r in comparison["runs"]:
        print(f"{r['label']}: {r['path']}")
    diffs = comparison["differences"]["summary"]
    print("inputs: " + ("the same" if not diffs else "; ".join(diffs)))
    verdicts = [c for c in comparison["changes"] if c["verdict_changed"]]
    for c in verdicts:
        print(f"verdict changed: {c['scenario']} / {c['route']}: "
              + " -> ".join(f"{k} {v}" for k, v in c["verdicts"].items()))
    print(f"{len(comparison['changes'])} route assessment(s) changed, {len(verdicts)} verdict change(s)")
    print(f"comparison: {paths.get('pdf') or paths['html']}")
    return 0


def _criteria(args) -> int:
    from .criteria import bundled_names, bundled_path, load_criteria_file
    from .errors import Problem
    names = bundled_names()
    if not args.name:
        for n in names:
            cs = load_criteria_file(bundled_path(n))
            print(f"{n:24s} {cs.description.split('.')[0].strip()}.")
        print("\nShow one with: egressmargin criteria NAME")
        return 0
    if args.name not in names:
        from .study import did_you_mean
        raise InputError([Problem("criteria", f"no bundled set '{args.name}'; expected one of {', '.join(names)}"
                                  f"{did_you_mean(args.name, names)}")])
    cs = load_criteria_file(bundled_path(args.name))
    print(f"{cs.name}\n\n{cs.description}\n\nCriteria:")
    for cid, c in cs.items.items():
        extra = ", ".join(f"{k} {v}" for k, v in c.params.items())
        print(f"  {cid:13s} limit {c.limit_text}{' (' + extra + ')' if extra else ''}"
              f"{' — ' + c.source if c.source else ''}")
    print("\nSources:")
    for s in cs.sources:
        print(f"  - {s}")
    return 0


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
