"""The ``toposweep`` command: ``run``, ``summary``, ``plot`` and ``demo``.

Mistakes in a configuration or an argument end with one line on stderr naming the key or the
argument, and exit code 2 (no traceback). Ctrl-C during ``run`` keeps the finished chunks and
exits with code 130; ``run --resume`` continues.
"""

from __future__ import annotations

import argparse
import os
import sys
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import NoReturn

from . import _core
from ._version import __version__
from .errors import ConfigError, ParameterError, StoreError, ToposweepError
from .results.store import journal_path, open_result

__all__ = ["main"]

EXIT_USAGE = 2
#: an unexpected error (a model function that raised, say): one line, this code
EXIT_FAILED = 1
EXIT_INTERRUPTED = 130


class _Parser(argparse.ArgumentParser):
    """argparse, but a usage mistake is one line (no usage block), exit code 2."""

    def error(self, message: str) -> NoReturn:
        sys.stderr.write(f"{self.prog}: error: {message} (see {self.prog} --help)\n")
        raise SystemExit(EXIT_USAGE)


#: resolutions `plot --dpi` accepts (a figure of 20 000 dpi is gigabytes of pixels)
DPI_RANGE = (10, 2000)


def _dpi(text: str) -> int:
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a whole number, got {text!r}") from None
    low, high = DPI_RANGE
    if not low <= value <= high:
        raise argparse.ArgumentTypeError(f"must lie in {low} … {high}, got {value}")
    return value


def _image_path(out: Path, fig: object) -> Path:
    """Refuse an output name whose suffix matplotlib cannot write, before writing."""
    known = fig.canvas.get_supported_filetypes()  # type: ignore[attr-defined]
    kind = out.suffix.lower().lstrip(".")
    if kind not in known:
        raise ParameterError(
            f"--out {out}: cannot write a {out.suffix or 'suffix-less'} file; end the name "
            f"with one of {', '.join('.' + k for k in sorted(known))}"
        )
    if not out.parent.is_dir():
        raise ParameterError(f"--out {out}: the folder {out.parent} does not exist")
    return out


def _reading(path: object, read: Callable[[], int]) -> int:
    """Run ``read``; an unexpected error while reading a result file is one line."""
    if Path(str(path)).suffix == ".toml":  # a natural slip: the configuration for its output
        raise ConfigError(
            f"{path} is a run configuration, not a result file: give the file named by its "
            f"`output` (computed by `toposweep run {path}`)"
        )
    try:
        return read()
    except (ToposweepError, OSError, KeyboardInterrupt):
        raise
    except Exception as exc:  # noqa: BLE001 - an attribute or variable not as we wrote it
        raise StoreError(
            f"{path}: not a valid toposweep result file ({type(exc).__name__}: {exc}); "
            "it may have been changed by another program — recompute it"
        ) from None


def _point(items: Sequence[str] | None) -> dict[str, float]:
    out: dict[str, float] = {}
    for item in items or []:
        name, sep, value = item.partition("=")
        try:
            if not sep or not name:
                raise ValueError
            number = float(value)
        except ValueError:
            raise ParameterError(
                f"--at expects NAME=VALUE such as f_level=-0.5, got {item!r}"
            ) from None
        key = name.strip()
        if key in out:  # two values for one parameter: neither is silently dropped
            raise ParameterError(
                f"--at gives {key!r} twice ({key}={out[key]:g} and {item}); give each once"
            )
        out[key] = number
    return out


def _run(args: argparse.Namespace) -> int:
    from .config import load_config
    from .summary import summarise
    from .sweep import SweepInterrupted, sweep

    cfg = load_config(args.config)
    out = cfg.output
    leftover = journal_path(out).is_dir()
    if not (args.resume or args.overwrite) and (out.exists() or leftover):
        what = "an interrupted run's journal " + str(journal_path(out)) if leftover else str(out)
        raise ConfigError(
            f"{args.config}: output: {what} exists; pass --resume to continue (or reuse) it, "
            "or --overwrite to start over"
        )
    kwargs = cfg.sweep_kwargs()
    if args.scheduler:  # (the command line wins over the configuration)
        kwargs["executor"] = args.scheduler
    try:
        if cfg.adaptive is not None:
            from .maps.phase_map import phase_map

            ds = phase_map(
                **kwargs, **cfg.adaptive, out=out, resume=args.resume,
                overwrite=args.overwrite, progress=not args.quiet,
            )  # fmt: skip
        else:
            ds = sweep(
                **kwargs,
                out=out,
                resume=args.resume,
                overwrite=args.overwrite,
                progress=not args.quiet,
            )
    except SweepInterrupted as exc:
        raise KeyboardInterrupt(
            f"interrupted after {exc.done} of {exc.total} points; the finished chunks are kept "
            f"in {journal_path(out)}; continue with: toposweep run {args.config} --resume"
        ) from None
    print(summarise(ds, str(out)))
    ds.close()
    return 0


def _summary(args: argparse.Namespace) -> int:
    from .summary import summarise

    def read() -> int:
        with open_result(args.file, load=True) as ds:
            text = summarise(ds, str(args.file))
        print(text)
        return 0

    return _reading(args.file, read)


def _plot(args: argparse.Namespace) -> int:
    return _reading(args.file, lambda: _draw(args))


def _draw(args: argparse.Namespace) -> int:
    from .flowplot import flow_figure
    from .plotting import plot_line, plot_phase_map

    at = _point(args.at)
    path = Path(args.file)
    with open_result(path, load=True) as ds:
        dims = [str(d) for d in ds.phase.dims]
        if args.flow:
            fig = flow_figure(ds, at, allow_code=args.allow_code)
            default = path.with_name(path.stem + "-flow.png")
        elif not dims:
            raise ParameterError(f"{path} holds a single point; use --flow to draw its centre flow")
        else:
            x = args.x or dims[0]
            others = [d for d in dims if d != x and d not in at]
            if args.line or (args.y is None and not others):
                fig = plot_line(ds, x, at=at)
                default = path.with_name(f"{path.stem}-{x}.png")
            else:
                y = args.y or others[0]
                fig = plot_phase_map(ds, x, y, at=at, show_evaluated=args.evaluated)
                default = path.with_suffix(".png")
    out = _image_path(Path(args.out), fig) if args.out else default
    fig.savefig(out, dpi=args.dpi)
    print(f"wrote {out}")
    return 0


def _demo(args: argparse.Namespace) -> int:
    from .demo import run_demo

    for p in run_demo(args.out, progress=not args.quiet):
        print(f"wrote {p}")
    return 0


def _parser() -> _Parser:
    p = _Parser(
        prog="toposweep",
        description="Z2 topological indices of lattice models over parameter grids.",
    )
    p.add_argument(
        "--version",
        action="version",
        version=f"toposweep {__version__} (kernels: {_core.INSTRUCTION_SET})",
    )
    sub = p.add_subparsers(dest="command", required=True, parser_class=_Parser)

    run = sub.add_parser(
        "run", help="run the sweep (or, with [adaptive], the phase map) of a TOML configuration"
    )
    run.add_argument("config", help="configuration file (TOML)")
    mode = run.add_mutually_exclusive_group()
    mode.add_argument(
        "--resume", action="store_true", help="continue an interrupted run (or reuse its file)"
    )
    mode.add_argument("--overwrite", action="store_true", help="replace an existing output")
    run.add_argument("--quiet", action="store_true", help="no progress bar")
    run.add_argument(
        "--scheduler",
        metavar="ADDRESS",
        help="run the chunks on a Dask cluster: its scheduler's address (tcp://host:8786), "
        "local:N for N worker processes on this machine, or processes:N for a process pool "
        "(default: [run] scheduler of the configuration, else this process)",
    )
    run.set_defaults(func=_run)

    summ = sub.add_parser("summary", help="phases and counts, undefined points, parity checks")
    summ.add_argument("file", help="result file (.nc)")
    summ.set_defaults(func=_summary)

    plot = sub.add_parser("plot", help="phase diagram, index/gap line, or centre flow as PNG")
    plot.add_argument("file", help="result file (.nc)")
    plot.add_argument("--x", help="swept parameter along the horizontal axis")
    plot.add_argument("--y", help="swept parameter along the vertical axis (phase diagram)")
    plot.add_argument(
        "--at",
        nargs="+",
        action="extend",
        metavar="NAME=VALUE",
        help="values of the other swept parameters (nearest grid point; default: middle); "
        "repeat --at or list several after one",
    )
    plot.add_argument("--line", action="store_true", help="indices and gap against --x")
    plot.add_argument(
        "--evaluated", action="store_true", help="mark the points a phase map evaluated"
    )
    plot.add_argument(
        "--flow",
        action="store_true",
        help="centre flow (hybrid Wannier centres) of the point given by --at",
    )
    plot.add_argument(
        "--allow-code",
        action="store_true",
        help="--flow on a result of a model defined by Python code: import and run that code "
        "(only for files you trust)",
    )
    plot.add_argument("--out", help="PNG file to write (default: next to the result file)")
    plot.add_argument("--dpi", type=_dpi, default=130, help="resolution, 10 … 2000 (default 130)")
    plot.set_defaults(func=_plot)

    demo = sub.add_parser("demo", help="sweep a fictional mixed-valence compound")
    demo.add_argument("--out", default="demo-output", help="folder for the files")
    demo.add_argument("--quiet", action="store_true", help="no progress bar")
    demo.set_defaults(func=_demo)
    return p


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``toposweep`` command; returns the exit code.

    Examples
    --------
    >>> main(["summary", "no/such/file.nc"])
    2
    """
    args = _parser().parse_args(argv)
    try:
        return int(args.func(args))
    except BrokenPipeError:  # output piped into e.g. `head`, which stopped reading
        sys.stdout = open(os.devnull, "w")  # keeps the interpreter quiet at exit
        return 0
    except KeyboardInterrupt as exc:  # SweepInterrupted says where the finished chunks are
        sys.stderr.write(f"toposweep: {exc or 'interrupted'}\n")
        return EXIT_INTERRUPTED
    except (ToposweepError, OSError) as exc:
        sys.stderr.write(f"toposweep: error: {_one_line(exc)}\n")
        return EXIT_USAGE
    except SystemExit as exc:  # raised by a model's or mapping's code while it ran
        sys.stderr.write(
            f"toposweep: error: the model's code called sys.exit({exc.code!r}); "
            "no result was written\n"
        )
        return EXIT_USAGE
    except Exception as exc:  # noqa: BLE001 - e.g. a model function that raised
        if os.environ.get("TOPOSWEEP_TRACEBACK"):
            raise
        sys.stderr.write(
            f"toposweep: error: {type(exc).__name__}: {_one_line(exc)} "
            "(TOPOSWEEP_TRACEBACK=1 shows where)\n"
        )
        return EXIT_FAILED


def _one_line(exc: BaseException) -> str:
    text = str(exc) or type(exc).__name__
    if isinstance(exc, OSError) and exc.filename:
        text = f"{exc.filename}: {exc.strerror or text}"
    return " ".join(text.split())


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
