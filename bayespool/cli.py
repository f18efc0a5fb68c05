"""The command line: parse, call the library, print. Bad input is one line on stderr and exit 2.

Each command has a ``_add_<name>`` function that declares its options and a ``_run_<name>`` function
that does the work through the library. Heavy modules are imported inside commands so ``--help``
starts fast.
"""
from __future__ import annotations

import argparse
import json
import sys
import warnings

from .errors import InputError

CAUTION = ("Statistical decision support, not a diagnostic device: confirm results by the "
           "laboratory's validated procedure, local regulations and the responsible licensed "
           "professional.")


class _Parser(argparse.ArgumentParser):
    """argparse with a one-line usage error (exit 2)."""

    def error(self, message):
        self.exit(2, f"{self.prog}: error: {message} (see {self.prog} --help)\n")


def _probability(text: str) -> float:
    try:
        return float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a number, got {text!r}") from None


def _add_run_inputs(p: argparse.ArgumentParser, readouts_required: bool = True) -> None:
    from .defaults import NEGATIVE_BELOW, POSITIVE_ABOVE, PREVALENCE
    p.add_argument("--layout", required=True, metavar="CSV", help="pool,sample memberships")
    p.add_argument("--readouts", required=readouts_required, metavar="CSV",
                   help="pool,result[,ct] readouts; several rows of one pool are replicates")
    p.add_argument("--samples", metavar="CSV", help="sample[,prior,plate,well]")
    p.add_argument("--assay", metavar="TOML",
                   help="assay model (default: constant Se 0.95, Sp 0.99, with a note)")
    p.add_argument("--prevalence", type=_probability, default=PREVALENCE, metavar="P",
                   help="prior probability for samples without a prior (default: %(default)s)")
    p.add_argument("--negative-below", type=_probability, default=NEGATIVE_BELOW,
                   metavar="LO", help="call negative when probability < LO (default: %(default)s)")
    p.add_argument("--positive-above", type=_probability, default=POSITIVE_ABOVE,
                   metavar="HI", help="call positive when probability > HI (default: %(default)s)")
    p.add_argument("--seed", type=int, default=None, metavar="N",
                   help="random seed for sampling decoders (reproducible runs)")


def _load_inputs(args):
    from .assay import DEFAULT_ASSAY, Assay
    from .run import Run
    if args.assay:
        assay = Assay.read(args.assay)
    else:
        assay = DEFAULT_ASSAY
        _note(args, f"no --assay given: assuming {assay.describe()}")
    run = Run.read(args.layout, args.readouts, args.samples, prevalence=args.prevalence)
    run.sources["assay"] = args.assay
    return run, assay


def _note(args, text: str) -> None:
    print(f"bayespool {args.command}: note: {text}", file=sys.stderr)


# ---- decode
def _add_decode(sub):
    from .defaults import METHODS
    p = sub.add_parser("decode", help="per-sample probabilities and calls from pooled readouts",
                       description="Posterior probability that each sample is positive, and a "
                       "call, from pooled readouts. " + CAUTION)
    _add_run_inputs(p)
    p.add_argument("--method", choices=METHODS, default="auto",
                   help="decoder (default: %(default)s: exact where every group of linked samples "
                   "is small enough)")
    p.add_argument("--out", required=True, metavar="CSV", help="posterior: sample,probability,call,...")
    p.add_argument("--report", metavar="HTML", help="also write an offline HTML report")
    p.add_argument("--json", action="store_true", help="print a machine-readable summary")
    return p


def _run_decode(args):
    from .decode import decode
    from .io import check_output_path, write_frame
    check_output_path(args.out)
    if args.report:
        check_output_path(args.report)
    run, assay = _load_inputs(args)
    post = decode(run, assay, method=args.method, negative_below=args.negative_below,
                  positive_above=args.positive_above, seed=args.seed)
    write_frame(post.to_frame(), args.out)
    if args.report:
        from .report import write_report
        write_report(args.report, run=run, assay=assay, posterior=post)
    for w in post.warnings:
        _note(args, w)
    if args.json:
        summary = post.summary()
        summary.update({"pools": run.n_pools, "readouts": run.n_readouts, "out": args.out,
                        "assay": assay.describe()})
        print(json.dumps(summary, indent=2))
    else:
        c = post.counts()
        print(f"{run.n_samples} samples, {run.n_pools} pools, {run.n_readouts} readouts, "
              f"decoded by {post.method}: {c['positive']} positive, {c['negative']} negative, "
              f"{c['inconclusive']} inconclusive")
        print(f"wrote {args.out}" + (f" and {args.report}" if args.report else ""))
    return 0


# ---- demo
def _add_demo(sub):
    p = sub.add_parser("demo", help="run the whole job on built-in invented data",
                       description="Decode an invented screening run end to end and write every "
                       "file into a folder. The data is invented for demonstration only.")
    p.add_argument("--out-dir", default="bayespool-demo", metavar="DIR",
                   help="folder for the demo's files (default: ./%(default)s)")
    return p


def _run_demo(args):
    from .demo import run_demo
    result = run_demo(args.out_dir)
    c = result.posterior.counts()
    agree = result.agreement()
    print("bayespool demo: an invented screening run (not real data)")
    print(f"  {result.posterior.n_samples} specimens, decoded by {result.posterior.method}: "
          f"{c['positive']} positive, {c['negative']} negative, {c['inconclusive']} inconclusive")
    print(f"  decided calls matching the invented truth: {agree['correct']} of {agree['decided']}")
    print(f"  files in {result.folder}/:")
    for name, path in result.files.items():
        print(f"    {name:<10} {path}")
    print("  " + CAUTION)
    return 0


COMMANDS = {
    "decode": (_add_decode, _run_decode),
    "demo": (_add_demo, _run_demo),
}


def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(prog="bayespool", description="Pooled testing with an imperfect assay: "
                     "per-specimen probabilities, next tests, assay calibration. " + CAUTION)
    from . import __version__
    parser.add_argument("--version", action="version", version=f"bayespool {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    for add, _ in COMMANDS.values():
        add(sub)
    return parser


def main(argv=None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    if args.command is None:
        parser.print_help()
        return 2
    _, run = COMMANDS[args.command]
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", UserWarning)
            return run(args)
    except InputError as exc:
        print(f"bayespool {args.command}: error: {exc}", file=sys.stderr)
        return 2
    except OSError as exc:
        name = getattr(exc, "filename", None)
        print(f"bayespool {args.command}: error: {name + ': ' if name else ''}"
              f"{exc.strerror or exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print(f"bayespool {args.command}: interrupted", file=sys.stderr)
        return 130
