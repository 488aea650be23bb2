"""The ``sigtune`` command: info, demo, serve, batch.

Every command exits 0 on success and 2 on bad input, with a one-line error on
stderr (never a traceback for a problem the user can fix).
"""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path

import numpy as np

from dsp import SigtuneError, __version__

EXIT_OK, EXIT_FAILED, EXIT_BAD_INPUT = 0, 1, 2


def channel_facts(channel) -> dict:
    """Return the facts ``sigtune info`` prints for one channel (statistics in float64)."""
    x = np.asarray(channel.data, dtype=np.float64)
    finite = x[np.isfinite(x)]
    rms = float(np.sqrt(np.mean(finite**2))) if finite.size else float("nan")
    peak = float(np.max(np.abs(finite))) if finite.size else float("nan")
    return {
        "name": channel.name, "fs_hz": channel.fs, "n_samples": channel.n_samples,
        "duration_s": channel.duration, "unit": channel.unit, "quantity": channel.quantity,
        "mean": float(np.mean(finite)) if finite.size else float("nan"),
        "rms": rms, "min": float(np.min(finite)) if finite.size else float("nan"),
        "max": float(np.max(finite)) if finite.size else float("nan"), "peak": peak,
        "crest_factor": peak / rms if rms > 0 else float("nan"),
        "non_finite_samples": int(x.size - finite.size),
    }


def _cmd_info(args) -> int:
    from dsp import read

    recording = read(args.file, **({"format": args.format} if args.format else {}))
    facts = {"source": str(args.file), "channels": [channel_facts(ch) for ch in recording]}
    if args.json:
        print(json.dumps(facts, indent=2))
        return EXIT_OK
    print(f"{args.file}: {len(recording)} channel(s)")
    print(f"{'name':<16}{'fs [Hz]':>10}{'samples':>11}{'dur [s]':>10} {'unit':<7}{'quantity':<13}"
          f"{'mean':>11}{'rms':>11}{'peak':>11}{'crest':>7}")
    for f in facts["channels"]:
        print(f"{f['name']:<16}{f['fs_hz']:>10g}{f['n_samples']:>11d}{f['duration_s']:>10.3f} "
              f"{f['unit']:<7}{f['quantity']:<13}{f['mean']:>11.4g}{f['rms']:>11.4g}{f['peak']:>11.4g}"
              f"{f['crest_factor']:>7.2f}")
    return EXIT_OK


def _cmd_demo(args) -> int:
    from dsp.demo import write_demo

    written = write_demo(args.directory)
    for path in written:
        print(path)
    return EXIT_OK


def _cmd_serve(args) -> int:
    from explorer.serve import serve

    return serve(file=args.file, session=args.session, port=args.port, address=args.address,
                 show=args.show, data_root=args.data_root)


def _cmd_batch(args) -> int:
    from dsp.campaign import run_batch

    result = run_batch(args.session, args.inputs, args.out, workers=args.workers,
                       scheduler=args.scheduler, force=args.force, output_format=args.format,
                       progress=not args.no_progress)
    return EXIT_OK if result.ok else EXIT_FAILED


def build_parser() -> argparse.ArgumentParser:
    """Return the argument parser of the ``sigtune`` command."""
    parser = argparse.ArgumentParser(prog="sigtune", description="A bench for vibration recordings.")
    parser.add_argument("--version", action="version", version=f"sigtune {__version__}")
    sub = parser.add_subparsers(dest="command", required=True)

    info = sub.add_parser("info", help="print channels, rate, duration, unit and statistics of a file")
    info.add_argument("file", type=Path)
    info.add_argument("--json", action="store_true", help="print JSON instead of a table")
    info.add_argument("--format", help="file format, overriding the extension (csv, tsv, wav, h5, npz)")
    info.set_defaults(run=_cmd_info)

    demo = sub.add_parser("demo", help="write the demo recordings (seeded, in every format)")
    demo.add_argument("directory", nargs="?", type=Path, default=Path("sigtune-demo"))
    demo.set_defaults(run=_cmd_demo)

    serve = sub.add_parser("serve", help="open the dashboard (on the demo recording if no file is given)")
    serve.add_argument("file", nargs="?", type=Path)
    serve.add_argument("--session", type=Path, help="a session file to load")
    serve.add_argument("--port", type=int, default=5006)
    serve.add_argument("--address", default="127.0.0.1",
                       help="interface to bind (default 127.0.0.1: this machine only)")
    serve.add_argument("--data-root", type=Path,
                       help="the only folder whose files the page may open or save to, by typed path or through "
                            "an uploaded session (default: the current folder)")
    serve.add_argument("--show", action="store_true", help="open a browser tab")
    serve.set_defaults(run=_cmd_serve)

    batch = sub.add_parser("batch", help="apply a session to every channel of many recordings")
    batch.add_argument("session", type=Path)
    batch.add_argument("inputs", nargs="+", help="files, directories or glob patterns")
    batch.add_argument("--out", type=Path, required=True, help="output directory")
    batch.add_argument("--workers", type=int, default=2, help="local Dask workers (default 2)")
    batch.add_argument("--scheduler", help="address of an existing Dask scheduler")
    batch.add_argument("--force", action="store_true", help="redo inputs already done")
    batch.add_argument("--format", default="h5", help="format of the processed channels (default h5)")
    batch.add_argument("--no-progress", action="store_true", help="no progress bar")
    batch.set_defaults(run=_cmd_batch)
    return parser


def main(argv: list[str] | None = None) -> int:
    """Run the ``sigtune`` command; return its exit code."""
    args = build_parser().parse_args(argv)
    try:
        return args.run(args)
    except SigtuneError as err:
        print(f"sigtune {args.command}: error: {err}", file=sys.stderr)
        return EXIT_BAD_INPUT
    except (FileNotFoundError, IsADirectoryError, PermissionError) as err:
        print(f"sigtune {args.command}: error: {err.filename}: {err.strerror}", file=sys.stderr)
        return EXIT_BAD_INPUT
    except BrokenPipeError:  # output piped into e.g. `head`, which closed early: not an error
        sys.stderr.close()
        return EXIT_OK


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
