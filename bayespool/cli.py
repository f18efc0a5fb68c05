"""The command line: parse, call the library, print. Bad input is one line on stderr and exit 2.

Options that several commands share are declared once, as argparse parent parsers
(:func:`_shared_options`). Each command has a ``_add_<name>`` function that declares its own options
and a ``_run_<name>`` function that calls the library and hands the result to the one emit path
(:func:`_emit`: ``--json`` prints ``result.summary()`` with the audit trail, otherwise
``str(result)``). Library errors name Python parameters; :func:`main` maps them to flags through
:data:`FLAGS`, in one place. Heavy modules are imported inside commands so ``--help`` starts fast.
"""
from __future__ import annotations

import argparse
import json
import os
import sys
import warnings

from .errors import ImpossibleEvidenceError, InputError

from .result_protocol import CAUTION, file_frame, json_ready, spelled_as


# Library errors name the Python parameter; the command line shows the flag that sets it. Flags
# that are not "--" + the parameter with "-" for "_" are listed here, in this one place.
FLAGS = {
    "n_draws": "--posterior-draws",
    'gibbs_options["chains"]': "--chains",
    'gibbs_options["max_sweeps"]': "--gibbs-sweeps",
    'gibbs_options["prevalence_prior"]': "--prevalence-prior",
    "result_words": "--result-word",
    "plate_size": "--destination-plate-size",
    "prefix": "--destination-prefix",
    "reserve": "--reserve-wells",
}


def flag(parameter: str) -> str:
    """The command-line flag that sets a library parameter (``fixed["NAME"]``: ``--fix``)."""
    if parameter.startswith('fixed["') and parameter.endswith('"]'):
        return f"--fix {parameter[7:-2]}=VALUE"
    return FLAGS.get(parameter) or "--" + parameter.replace("_", "-")


class _Parser(argparse.ArgumentParser):
    """argparse with a one-line usage error (exit 2)."""

    def error(self, message):
        self.exit(2, f"{self.prog}: error: {message} (see {self.prog} --help)\n")


def _probability(text: str) -> float:
    try:
        return float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a number, got {text!r}") from None


def _result_word(text: str):
    word, sep, meaning = text.rpartition("=")
    if not sep or not word.strip() or meaning.strip().lower() not in ("positive", "negative",
                                                                      "skip"):
        raise argparse.ArgumentTypeError(f"expected WORD=positive, WORD=negative or WORD=skip, "
                                         f"got {text!r}")
    return word.strip(), meaning.strip().lower()


def _result_words(args, assay=None) -> dict:
    """The laboratory's own words: the assay file's [results] table, then --result-word."""
    from .results import MEANINGS
    words = {}
    for key, value in (assay.results if assay is not None else {}).items():
        if key in MEANINGS and isinstance(value, list):
            words.update(dict.fromkeys(value, key))
        else:
            words[key] = value
    words.update(dict(getattr(args, "result_word", [])))
    return words


INPUT_OPTIONS = {"layout": "--layout", "readouts": "--readouts", "samples": "--samples",
                 "assay": "--assay", "validation": "--validation", "assay_file": "ASSAY.toml",
                 "pools": "--pools", "controls": "--controls"}


def _inputs(args) -> dict:
    """The command's input files as given: option -> path (a number for --samples is no file)."""
    out = {}
    for name, label in INPUT_OPTIONS.items():
        value = getattr(args, name, None)
        if isinstance(value, str) and not value.strip().isdigit():
            out[label] = value
    return out


def _audit(args, inputs: dict | None = None):
    """The audit trail of this command (argv, version, seed, date, inputs' size and SHA-256),
    made once per command."""
    if getattr(args, "audit", None) is None:
        from .audit import make_audit
        args.audit = make_audit(_inputs(args) if inputs is None else inputs,
                                argv=getattr(args, "argv", None), seed=getattr(args, "seed", None))
    return args.audit


def _emit(args, result, *, extra: dict | None = None, text: str | None = None,
          audit: bool = True, key: str | None = None) -> None:
    """The one way a command shows its result: with ``--json`` the result's ``summary()`` (under
    ``key`` when given) plus ``extra`` (and the audit trail), otherwise ``str(result)`` or
    ``text`` (the result's text with what the command wrote)."""
    if getattr(args, "json", False):
        summary = result.summary()
        doc = {**({key: summary} if key else summary), **(extra or {})}
        if audit:
            doc["audit"] = _audit(args).to_dict()
        print(json.dumps(json_ready(doc), indent=2))
    else:
        print(result if text is None else text)


def _write_table(result, path) -> None:
    """``result.to_frame()`` as its file, written atomically (the natural ID as the first
    column)."""
    from .io import write_frame
    write_frame(file_frame(result.to_frame()), path)


def _write_report(args, path=None, **results) -> None:
    """The offline HTML report of ``results`` with this command's audit trail."""
    from .report import write_report
    write_report(path or args.report, audit=_audit(args), **results)


def _check_outputs(args, more: dict | None = None, **outputs) -> None:
    """Before any work: every output (option -> path, plus ``more``: description -> path) lies in
    an existing folder and is neither an input of the command nor another output."""
    from .io import check_outputs
    named = {f"--{k.replace('_', '-')}": v for k, v in outputs.items()}
    check_outputs({**named, **(more or {})}, _inputs(args))


def _shared_options() -> dict:
    """The options several commands share, declared once as argparse parent parsers: ``json``,
    ``seed``, ``report``, ``words`` (--result-word), ``targets`` (batch targets), ``worklist``, and
    the run inputs (``run``; ``first_stage`` where readouts may be missing)."""
    from .defaults import NEGATIVE_BELOW, POSITIVE_ABOVE, PREVALENCE

    def parent(*parents):
        return argparse.ArgumentParser(add_help=False, parents=list(parents))

    json_ = parent()
    json_.add_argument("--json", action="store_true",
                       help="print a machine-readable summary (JSON) instead of the text")
    seed = parent()
    seed.add_argument("--seed", type=int, default=None, metavar="N",
                      help="random seed (reproducible results)")
    report = parent()
    report.add_argument("--report", metavar="HTML", help="also write an offline HTML report")
    words = parent()
    words.add_argument("--result-word", type=_result_word, action="append", default=[],
                       metavar="WORD=MEANING", help="read a laboratory's own result word as "
                       "positive, negative or skip (repeatable; adds to the usual words and the "
                       "assay file's [results] table)")
    targets = parent()
    g = targets.add_argument_group("batch targets (calls that meet the laboratory's targets)")
    g.add_argument("--target-sensitivity", type=_probability, default=None, metavar="S",
                   help="call negative the lowest-probability specimens whose expected missed "
                   "positives stay within (1 - S) of the batch's expected positives")
    g.add_argument("--max-false-discovery", type=_probability, default=None, metavar="F",
                   help="call positive the highest-probability specimens whose expected false "
                   "positives stay within F of their number")
    worklist = parent()
    g = worklist.add_argument_group("worklist (transfers that build the pools; needs wells in "
                                    "--samples)")
    g.add_argument("--worklist", metavar="CSV",
                   help="also write the transfers: source_plate,source_well,destination_plate,"
                   "destination_well,volume_ul,sample,pool")
    g.add_argument("--pool-volume", type=float, default=200.0, metavar="UL",
                   help="microlitres in each pool; every member gives UL / k (default: "
                   "%(default)s)")
    g.add_argument("--destination-plate-size", type=int, choices=(96, 384), default=96,
                   help="wells per destination plate (default: %(default)s)")
    g.add_argument("--destination-prefix", default="POOLS", metavar="NAME",
                   help="destination plates are NAME1, NAME2, ... (default: %(default)s)")
    g.add_argument("--reserve-wells", default=None, metavar="WELLS",
                   help="comma-separated wells left empty on every destination plate for "
                   "controls, e.g. G12,H12")

    def run_inputs(readouts_required: bool):
        p = parent(json_, seed, report, words, targets)
        p.add_argument("--layout", required=True, metavar="CSV", help="pool,sample memberships")
        p.add_argument("--readouts", required=readouts_required, metavar="CSV",
                       help="pool,result[,ct] readouts; several rows of one pool are replicates")
        p.add_argument("--samples", metavar="CSV", help="sample[,prior,plate,well,control]")
        p.add_argument("--controls", metavar="CSV",
                       help="control wells: plate,well,kind[,id,ct_min,ct_max] with kind "
                       "positive, negative or extraction; a failed control leaves its plate's "
                       "readouts out")
        p.add_argument("--assay", metavar="TOML",
                       help="assay model (default: constant Se 0.95, Sp 0.99, with a note)")
        p.add_argument("--prevalence", type=_probability, default=PREVALENCE, metavar="P",
                       help="prior probability for samples without a prior (default: "
                       "%(default)s)")
        p.add_argument("--negative-below", type=_probability, default=None,
                       metavar="LO", help=f"call negative when probability < LO (default: "
                       f"{NEGATIVE_BELOW}, unless --target-sensitivity is given)")
        p.add_argument("--positive-above", type=_probability, default=None,
                       metavar="HI", help=f"call positive when probability > HI (default: "
                       f"{POSITIVE_ABOVE}, unless --max-false-discovery is given)")
        p.add_argument("--assay-uncertainty", action="store_true",
                       help="average each pool's likelihood over the fitted assay's uncertainty "
                       "(the [fit.uncertainty] table calibrate writes); an approximation that "
                       "treats each pool's assay as a separate draw")
        return p

    return {"json": json_, "seed": seed, "report": report, "words": words, "targets": targets,
            "worklist": worklist, "run": run_inputs(True), "first_stage": run_inputs(False)}


def _targets(args) -> dict:
    return {"negative_below": args.negative_below, "positive_above": args.positive_above,
            "target_sensitivity": args.target_sensitivity,
            "max_false_discovery": args.max_false_discovery}


def _load_inputs(args):
    """The run and the assay; the note about a default assay comes only once the inputs read
    cleanly, so bad input gets exactly one line on stderr."""
    from .assay import DEFAULT_ASSAY, Assay
    from .controls import read_run
    assay = Assay.read(args.assay) if args.assay else DEFAULT_ASSAY
    if getattr(args, "assay_uncertainty", False):
        from .assay_spread import integrate
        if not args.assay:
            raise InputError("--assay-uncertainty needs --assay: a file written by calibrate")
        assay = integrate(assay, args.assay)
    run, args.control_check = read_run(args.layout, args.readouts, args.samples,
                                       getattr(args, "controls", None),
                                       prevalence=args.prevalence,
                                       result_words=_result_words(args, assay))
    run = run.with_sources(assay=args.assay)
    if not args.assay:
        _note(args, f"no --assay given: assuming {assay.describe()}")
    if getattr(args, "assay_uncertainty", False):
        _note(args, "likelihoods averaged over the fitted assay's uncertainty (--assay-uncertainty;"
                    " an approximation: each pool's assay is treated as a separate draw)")
    return run, assay


def _read_assay(path):
    """The assay file, or None when none was given."""
    if not path:
        return None
    from .assay import Assay
    return Assay.read(path)


def _note(args, text: str) -> None:
    """A note for stderr, printed when the command succeeds: input that turns out to be bad gets
    its one error line and nothing else."""
    args.pending_notes.append(f"bayespool {args.command}: note: {text}")


def _write_worklist(args, layout, samples, skip_pools=()):
    from .io import write_frame
    from .worklist import build_worklist
    reserve = ([w.strip() for w in args.reserve_wells.split(",") if w.strip()]
               if args.reserve_wells else None)
    wl = build_worklist(layout, samples, pool_volume=args.pool_volume,
                        plate_size=args.destination_plate_size, prefix=args.destination_prefix,
                        reserve=reserve, skip_pools=skip_pools)
    write_frame(wl.frame, args.worklist)
    return wl


# ---- assay
def _add_assay(sub, shared):
    p = sub.add_parser("assay", parents=[shared["json"]],
                       help="show what an assay file implies: the model and Se(k, d)",
                       description="Print an assay file's model and the sensitivity it implies "
                       "for every pool size k and number of positive members d = 1..k (for a "
                       "[ct] assay, integrated over the individual Cts of the positives); --json "
                       'prints {"specificity": ..., "sensitivity": [{"pool_size", "positives", '
                       '"value"}, ...]}. ' + CAUTION)
    p.add_argument("assay_file", metavar="ASSAY.toml", help="the assay file")
    p.add_argument("--pool-sizes", type=_int_list, default=None, metavar="K,K,...",
                   help="pool sizes to tabulate (default: 1,2,4,8,16,32, or a table's own sizes)")
    p.add_argument("--plot", metavar="FILE", help="also draw the curve (.svg or .png)")
    return p


def _run_assay(args):
    from .assay import Assay
    from .assay_view import assay_curve
    plot = args.plot
    if plot:
        _check_outputs(args, plot=plot)
        if not plot.lower().endswith((".svg", ".png")):
            raise InputError(f"--plot {plot!r}: the file name must end in .svg or .png")
    result = assay_curve(Assay.read(args.assay_file), pool_sizes=args.pool_sizes,
                         source=args.assay_file)
    if plot:
        from .report.plots import write_sensitivity_plot
        write_sensitivity_plot(result.assay, plot, result.pool_sizes)
    _emit(args, result, audit=False,
          text=str(result) + (f"\nwrote {plot}" if plot else ""))
    return 0


# ---- decode
def _add_decode(sub, shared):
    from .defaults import BP_DAMPING, BP_MAX_SWEEPS, BP_TOLERANCE, LOOPY_SAMPLER_LIMIT, METHODS
    p = sub.add_parser("decode", parents=[shared["run"]],
                       help="per-sample probabilities and calls from pooled readouts",
                       description="Posterior probability that each sample is positive, and a "
                       "call, from pooled readouts. " + CAUTION)
    p.add_argument("--method", choices=METHODS, default="auto",
                   help="decoder (default: %(default)s: exact enumeration for small groups of linked "
                   "samples, belief propagation for large ones)")
    bp = p.add_argument_group("belief propagation (--method bp, and auto on large groups)")
    bp.add_argument("--max-sweeps", type=int, default=BP_MAX_SWEEPS, metavar="N",
                    help="stop after N sweeps over the pools (default: %(default)s)")
    bp.add_argument("--damping", type=_probability, default=BP_DAMPING, metavar="D",
                    help="keep a fraction D of each old message, 0 <= D < 1; damping helps when "
                    "the iteration oscillates (default: %(default)s)")
    bp.add_argument("--tolerance", type=_probability, default=BP_TOLERANCE, metavar="TOL",
                    help="converged when no message (log-odds) changes by TOL or more in a sweep "
                    "(default: %(default)s)")
    bp.add_argument("--loopy-sampler-limit", type=int, default=LOOPY_SAMPLER_LIMIT, metavar="N",
                    help="auto: re-decode loopy groups too large to enumerate by the Gibbs "
                    "sampler, smallest first, up to N specimens; beyond, BP's answer is kept and "
                    "marked bp-loopy (default: %(default)s; 0 keeps BP's answer everywhere)")
    p.add_argument("--out", required=True, metavar="CSV", help="posterior: sample,probability,call,...")
    p.add_argument("--strict", action="store_true",
                   help="exit with status 3 when the result is unreliable: belief propagation "
                   "did not converge, the readouts do not fit the assay model, or a target "
                   "leaves specimens inconclusive")
    p.add_argument("--no-model-check", action="store_true",
                   help="skip the check of the readouts against the assay model")
    _add_gibbs_options(p)
    return p


def _add_gibbs_options(p) -> None:
    g = p.add_argument_group("Gibbs sampler (--method gibbs, or auto's fallback)")
    g.add_argument("--chains", type=int, default=None, metavar="N",
                   help="number of chains from spread starting points (default: 4)")
    g.add_argument("--gibbs-sweeps", type=int, default=None, metavar="N",
                   help="sweep cap per chain when R-hat <= 1.01 and ESS >= 400 are not reached "
                   "sooner (default: 40000)")
    g.add_argument("--prevalence-prior", default=None, metavar="A,B",
                   help="treat the prevalence as unknown with a Beta(A, B) prior, shared by all "
                   "samples and sampled jointly (replaces --prevalence and sample priors)")


def _gibbs_options(args) -> dict:
    return {"chains": args.chains, "max_sweeps": args.gibbs_sweeps,
            "prevalence_prior": args.prevalence_prior}


def _run_decode(args):
    from .decoders import decode
    _check_outputs(args, out=args.out, report=args.report)
    run, assay = _load_inputs(args)
    post = decode(run, assay, method=args.method, seed=args.seed, damping=args.damping,
                  tolerance=args.tolerance, max_sweeps=args.max_sweeps,
                  gibbs_options=_gibbs_options(args), model_check=not args.no_model_check,
                  loopy_sampler_limit=args.loopy_sampler_limit, **_targets(args))
    check = args.control_check
    if check is not None:
        from .controls import mark_specimens
        mark_specimens(post, run, check)
    _write_table(post, args.out)
    if args.report:
        _write_report(args, run=run, assay=assay, posterior=post, controls=check)
    for w in post.warnings + (check.messages if check is not None else []):
        _note(args, w)
    problems = post.problems()
    extra = {"pools": run.n_pools, "readouts": run.n_readouts, "out": args.out,
             "assay": assay.describe(), "reliable": not problems,
             "assay_uncertainty": args.assay_uncertainty}
    if check is not None:
        extra["controls"] = check.summary()
    _emit(args, post, extra=extra,
          text="\n".join([str(post)] + ([str(check)] if check is not None else [])
                         + [f"wrote {args.out}" + (f" and {args.report}" if args.report else "")]))
    if args.strict and problems:
        for why in problems:
            print(f"bayespool {args.command}: unreliable: {why}", file=sys.stderr)
        return 3
    return 0


# ---- demo
def _add_demo(sub, shared):
    p = sub.add_parser("demo", help="run the whole job on built-in invented data",
                       description="Calibrate the assay, decode a screening run, plan the next "
                       "tests and write the report, on invented data, every file into one "
                       "folder. The data is invented for demonstration only.")
    p.add_argument("--out-dir", default="bayespool-demo", metavar="DIR",
                   help="folder for the demo's files (default: ./%(default)s)")
    return p


def _run_demo(args):
    from .demo import run_demo
    print(run_demo(args.out_dir))
    return 0


# ---- design
def _number_list(text: str, kind=float) -> list:
    """Comma-separated numbers of one kind (int or float) for sweeps and lists of options."""
    name = "whole numbers" if kind is int else "numbers"
    try:
        values = [kind(v) for v in text.split(",") if v.strip()]
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected {name} separated by commas, got "
                                         f"{text!r}") from None
    if not values:
        raise argparse.ArgumentTypeError(f"expected at least one of the {name}")
    return values


def _int_list(text: str) -> list[int]:
    return _number_list(text, int)


def _float_list(text: str) -> list[float]:
    return _number_list(text, float)


def _add_design(sub, shared):
    p = sub.add_parser("design", parents=[shared["json"], shared["seed"], shared["worklist"]],
                       help="make a pooling layout (dorfman, array, kautz-singleton, "
                       "random, code) or find the best Dorfman pool size",
                       description="Write a pooling layout (pool,sample) and print its properties: "
                       "pools, pool sizes, pools per specimen and the disjunctness it guarantees. "
                       "With --optimize, the Dorfman pool size with the fewest expected tests. "
                       + CAUTION)
    p.add_argument("--scheme", required=True,
                   choices=("dorfman", "array", "kautz-singleton", "random", "code"))
    p.add_argument("--samples", metavar="N|CSV",
                   help="number of specimens (IDs S0001...) or a samples file (sample column)")
    p.add_argument("--out", metavar="CSV", help="layout to write: pool,sample")
    p.add_argument("--max-pool-size", type=int, metavar="K",
                   help="no pool may hold more than K specimens")
    p.add_argument("--pool-size", type=int, metavar="K", help="dorfman: specimens per pool")
    p.add_argument("--fill", choices=("columns", "rows"),
                   help="dorfman on plates (samples file with plate and well): pool neighbouring "
                   "wells down the columns (A1, B1, ...; default) or along the rows (A1, A2, ...)")
    p.add_argument("--by-risk", action="store_true",
                   help="dorfman: pool specimens of similar prior (samples file with a prior "
                   "column, e.g. from bayespool regress --priors); without --pool-size, sizes up "
                   "to --max-pool-size with the fewest expected tests")
    p.add_argument("--rows", type=int, metavar="R",
                   help="array: rows per grid (default 8 x 12, or near-square for few specimens; "
                   "on plates, the plate's own rows and columns, or R x C tiles laid on it)")
    p.add_argument("--cols", type=int, metavar="C", help="array: columns per grid")
    p.add_argument("--positives", type=int, metavar="D",
                   help="kautz-singleton: positives to single out without test error")
    p.add_argument("--q", type=int, metavar="Q", help="kautz-singleton: prime field size")
    p.add_argument("--dimension", type=int, metavar="M", help="kautz-singleton: code dimension")
    p.add_argument("--length", type=int, metavar="L",
                   help="kautz-singleton: code length, at most q (default q)")
    p.add_argument("--pools-per-sample", type=int, default=2, metavar="W",
                   help="random: pools each specimen is in (default: %(default)s)")
    p.add_argument("--pools", type=int, metavar="T",
                   help="random: number of pools (default: the fewest within --max-pool-size)")
    p.add_argument("--errors", type=int, default=1, metavar="E",
                   help="code: wrong readouts to tolerate when one specimen is positive "
                   "(default: %(default)s)")
    p.add_argument("--code", choices=("hamming", "extended-hamming", "bch", "extended-bch"),
                   help="code: the code family (default: Hamming or extended Hamming for one "
                   "error, BCH for more), shortened to the fewest pools")
    p.add_argument("--optimize", action="store_true",
                   help="dorfman: best pool size for --prevalence (and --assay)")
    p.add_argument("--prevalence", type=_probability, metavar="P",
                   help="with --optimize: the expected fraction of positive specimens")
    p.add_argument("--assay", metavar="TOML",
                   help="with --optimize: the assay (default: an error-free test, as Dorfman 1943)")
    p.add_argument("--target-sensitivity", type=_probability, metavar="S",
                   help="with --optimize: the cheapest pool size whose sensitivity (closed form) "
                   "is at least S")
    return p


def _design_options(args) -> dict:
    if args.scheme == "dorfman":
        return {"pool_size": args.pool_size, "fill": args.fill, "by_risk": args.by_risk}
    if args.scheme == "array":
        return {"rows": args.rows, "cols": args.cols}
    if args.scheme == "kautz-singleton":
        return {"positives": args.positives, "q": args.q, "dimension": args.dimension,
                "length": args.length}
    if args.scheme == "code":
        return {"errors": args.errors, "code": args.code}
    return {"pools_per_sample": args.pools_per_sample, "pools": args.pools, "seed": args.seed}


def _run_design(args):
    from .design import make_design, optimal_dorfman
    from .design.specimens import specimens
    if args.by_risk and args.scheme != "dorfman":
        raise InputError("--by-risk is for --scheme dorfman")
    _check_outputs(args, out=args.out, worklist=args.worklist)
    opt = None
    if args.optimize:
        if args.scheme != "dorfman":
            raise InputError("--optimize is for --scheme dorfman")
        if args.prevalence is None:
            raise InputError("--optimize needs --prevalence P")
        opt = optimal_dorfman(args.prevalence, _read_assay(args.assay),
                              max_pool_size=args.max_pool_size,
                              target_sensitivity=args.target_sensitivity)
        if not opt.meets_target:
            _note(args, f"no pool size reaches a sensitivity of {args.target_sensitivity:g} "
                  f"(the best is {opt.best.sensitivity:.4f} at k = {opt.best.pool_size}): "
                  "consider a repeat test of positives or a more sensitive assay")
        args.pool_size = opt.best.pool_size
    elif args.prevalence is not None or args.assay or args.target_sensitivity is not None:
        raise InputError("--prevalence, --assay and --target-sensitivity go with --optimize")
    if args.samples is None or args.out is None:
        if opt is not None and args.samples is None and args.out is None:
            _emit(args, opt, key="optimum", audit=False)
            return 0
        raise InputError("give both --samples N|CSV and --out LAYOUT.csv")
    if opt is not None and not args.json:
        print(opt)
    spec = specimens(args.samples)
    if args.worklist and (spec.table is None or "well" not in spec.table.columns):
        raise InputError("--worklist needs --samples to be a samples file with a well column "
                         "(and plate)")
    design = make_design(args.scheme, spec, max_pool_size=args.max_pool_size,
                         **_design_options(args))
    wl = _write_worklist(args, design.layout, spec.table) if args.worklist else None
    _write_table(design, args.out)
    extra = {"out": args.out}
    if opt is not None:
        extra["optimum"] = opt.summary()
    if wl is not None:
        extra["worklist"] = dict(wl.summary(), out=args.worklist)
    text = str(design) if wl is None else "\n".join(
        [str(design.properties), str(wl), f"wrote {args.worklist}"] + design.pool_lines())
    _emit(args, design, extra=extra, text=f"{text}\nwrote {args.out}")
    return 0


# ---- simulate
def _add_simulate(sub, shared):
    from .defaults import NEGATIVE_BELOW, POSITIVE_ABOVE
    p = sub.add_parser("simulate", parents=[shared["json"], shared["seed"], shared["report"],
                                            shared["targets"]], help="operating characteristics of testing protocols by "
                       "simulation", description="Simulate testing protocols on invented cohorts "
                       "with readouts drawn from the assay model (dilution included): tests, "
                       "sensitivity, specificity, predictive values, rounds and draws per "
                       "specimen with Monte Carlo standard errors. Comma-separated schemes, "
                       "prevalences, pool sizes, assay files or thresholds make a study in one "
                       "table. " + CAUTION)
    p.add_argument("--scheme", required=True, metavar="SCHEME[,SCHEME...]",
                   help="protocol(s): individual, dorfman (classic two-stage), array (rows, "
                   "columns, then crossings) or bayes (decode, plan the next --tests, read, "
                   "repeat until every specimen is decided)")
    p.add_argument("--samples", required=True, metavar="N|CSV",
                   help="specimens per cohort, or a samples file (its prior column is used)")
    p.add_argument("--prevalence", type=_float_list, metavar="P[,P...]",
                   help="prior of every specimen (without a prior in the samples file)")
    p.add_argument("--assay", metavar="TOML[,TOML...]",
                   help="assay model(s) that draw the readouts (default: constant Se 0.95, "
                   "Sp 0.99)")
    p.add_argument("--pool-size", type=_int_list, metavar="K[,K...]", help="dorfman: pool size")
    p.add_argument("--rows", type=int, metavar="R", help="array: rows per grid (default 8)")
    p.add_argument("--cols", type=int, metavar="C", help="array: columns per grid (default 12)")
    p.add_argument("--max-pool-size", type=int, metavar="K", help="largest pool allowed")
    p.add_argument("--negative-below", type=_float_list, default=None,
                   metavar="LO[,LO...]", help="decoding protocols: call negative below LO "
                   f"(default: {NEGATIVE_BELOW}, unless --target-sensitivity is given)")
    p.add_argument("--positive-above", type=_float_list, default=None,
                   metavar="HI[,HI...]", help="decoding protocols: call positive above HI "
                   f"(default: {POSITIVE_ABOVE}, unless --max-false-discovery is given)")
    p.add_argument("--tests", type=int, metavar="N",
                   help="decoding protocols: tests per round")
    p.add_argument("--method", metavar="NAME", help="decoding protocols: decoder")
    p.add_argument("--runs", type=int, default=1000, metavar="R",
                   help="simulated cohorts per setting (default: %(default)s)")
    p.add_argument("--out", metavar="CSV", help="also write the results table")
    p.add_argument("--plots", metavar="DIR", help="write a figure per measure (tests per "
                   "specimen, sensitivity, specificity against prevalence) as PNG and SVG here")
    where = p.add_mutually_exclusive_group()
    where.add_argument("--workers", type=int, metavar="N",
                       help="play the cohorts on N local worker processes (a Dask LocalCluster); "
                       "the numbers are the same as in-process")
    where.add_argument("--scheduler", metavar="ADDRESS",
                       help="play the cohorts on the Dask cluster whose scheduler is at ADDRESS "
                       "(e.g. tcp://10.0.0.5:8786)")
    return p


LONG_STUDY_SECONDS = 10.0  # studies forecast to take longer say so before they start


def _announce_estimate(estimate) -> None:
    if estimate.seconds >= LONG_STUDY_SECONDS:
        print(f"bayespool simulate: {estimate.text()}", file=sys.stderr, flush=True)


def _run_simulate(args):
    from .simulation.engine import cluster_client
    from .simulation.simulator import Sweep
    from .simulation.study import run_study
    if args.workers is not None and args.workers < 1:
        raise InputError(f"--workers must be at least 1, got {args.workers}")
    study = _check_simulate(args)
    with cluster_client(args.workers, args.scheduler) as client:
        result = run_study(args.schemes, args.samples, assays=args.assays, seed=args.seed,
                           progress=sys.stderr.isatty(), client=client,
                           on_estimate=_announce_estimate, **study)
    study = result if isinstance(result, Sweep) else Sweep([result])
    table, audit = study.table, _audit(args, args.input_files)
    written = []
    if args.out:
        from .io import write_frame
        write_frame(table, args.out)
        written.append(args.out)
    if args.plots:
        from .simulation.plots import write_plots
        written += [str(p) for p in write_plots(table, args.plots)]
    if args.report:
        from .report.study import write_study_report
        write_study_report(args.report, study, audit=audit)
        written.append(args.report)
    _emit(args, result, text=str(result) + (f"\nwrote {', '.join(written)}" if written else ""))
    return 0


def _comma_names(text: str, what: str) -> list[str]:
    names = [t.strip() for t in text.split(",")]
    if not all(names):
        raise InputError(f"{what} {text!r} has an empty item")
    if len(set(names)) < len(names):
        raise InputError(f"{what} {text!r} names one twice")
    return names


def _check_simulate(args) -> dict:
    """The study's options, checked before any work (and before a cluster starts)."""
    from pathlib import Path

    from .assay import DEFAULT_ASSAY, Assay
    from .design.specimens import specimens
    from .io import check_outputs
    from .simulation.study import check_study
    args.schemes = _comma_names(args.scheme, "--scheme")
    args.assay_files = _comma_names(args.assay, "--assay") if args.assay else []
    outputs = {f"--{k}": getattr(args, k) for k in ("out", "report") if getattr(args, k)}
    if args.plots:
        from .simulation.plots import MEASURES
        folder = Path(args.plots)
        if not folder.is_dir():
            raise InputError(f"--plots {args.plots}: no such folder")
        outputs.update({f"--plots {m}.{kind}": str(folder / f"{m}.{kind}")
                        for m in MEASURES for kind in ("png", "svg")})
    args.input_files = {"--samples": args.samples} if not str(args.samples).strip().isdigit() \
        else {}
    args.input_files.update({f"--assay {f}" if len(args.assay_files) > 1 else "--assay": f
                             for f in args.assay_files})
    check_outputs(outputs, args.input_files)
    study = {"prevalences": args.prevalence, "pool_sizes": args.pool_size,
             "negative_below": args.negative_below, "positive_above": args.positive_above,
             "runs": args.runs, "rows": args.rows, "cols": args.cols,
             "max_pool_size": args.max_pool_size, "tests": args.tests, "method": args.method,
             "target_sensitivity": args.target_sensitivity,
             "max_false_discovery": args.max_false_discovery}
    check_study(args.schemes, **study)
    args.samples = specimens(args.samples)
    if args.assay_files:
        args.assays = {f: Assay.read(f) for f in args.assay_files}
    else:
        _note(args, f"no --assay given: assuming {DEFAULT_ASSAY.describe()}")
        args.assays = {None: DEFAULT_ASSAY}
    return study


# ---- calibrate
def _fixed_value(text: str):
    name, sep, value = text.partition("=")
    if not sep or not name.strip():
        raise argparse.ArgumentTypeError(f"expected NAME=VALUE, got {text!r}")
    try:
        return name.strip(), float(value)
    except ValueError:
        raise argparse.ArgumentTypeError(f"the value of {name.strip()!r} must be a number, got "
                                         f"{value!r}") from None


def _add_calibrate(sub, shared):
    p = sub.add_parser("calibrate", parents=[shared["json"], shared["seed"], shared["report"],
                                             shared["words"]], help="fit the assay (specificity, sensitivity and its fall "
                       "with dilution) from validation runs or past runs",
                       description="Fit the assay model and write an assay file for decode and "
                       "plan. From validation runs with known truth (--validation), or from past "
                       "runs whose truth is latent (--layout and --readouts; individual follow-up "
                       "tests are pools of one). " + CAUTION)
    src = p.add_argument_group("data (one of)")
    src.add_argument("--validation", metavar="CSV",
                     help="pool_size,positives,result: one row per readout of a pool whose number "
                     "of positive members is known")
    src.add_argument("--layout", metavar="CSV", help="past runs: pool,sample memberships")
    src.add_argument("--readouts", metavar="CSV", help="past runs: pool,result readouts")
    src.add_argument("--samples", metavar="CSV", help="past runs: sample[,plate,well] (optional)")
    p.add_argument("--model", choices=("constant", "dilution", "table", "best"), default="best",
                   help="sensitivity family (default: %(default)s, the smallest AIC)")
    p.add_argument("--out", required=True, metavar="TOML", help="assay file to write")
    p.add_argument("--fix", type=_fixed_value, action="append", default=[], metavar="NAME=VALUE",
                   help="keep a parameter at a value instead of fitting it, e.g. se_max=1 or "
                   "specificity=0.998 (repeatable)")
    p.add_argument("--intervals", choices=("profile", "wald"), default="profile",
                   help="interval method for fitted parameters (default: %(default)s likelihood; "
                   "the specificity from validation always has the exact Clopper-Pearson interval)")
    p.add_argument("--level", type=_probability, default=0.95, metavar="L",
                   help="confidence level of the intervals (default: %(default)s)")
    p.add_argument("--gof-draws", type=int, default=0, metavar="N",
                   help="validation: also a parametric bootstrap p-value for the goodness of fit "
                   "from N refitted simulations (default: none)")
    p.add_argument("--no-plot", action="store_true",
                   help="do not write the sensitivity plot (PNG and SVG beside the assay file)")
    p.add_argument("--allow-unidentified", action="store_true",
                   help="past runs: write the fit even when the data cannot identify it (it is "
                   "marked so in the file); without this such a fit is refused with the reason")
    p.add_argument("--ct-cutoff", type=float, default=40.0, metavar="CT",
                   help="validation with a ct column: the run's Ct cutoff (default: %(default)s)")
    return p


def _run_calibrate_ct(args, table):
    """A validation file with Cts: fit the [ct] load model (bayespool.calibration.ct_fit)."""
    from .calibration.ct_fit import calibrate_ct
    result = calibrate_ct(table, cutoff=args.ct_cutoff)
    result.assay.write(args.out)
    _emit(args, result, extra={"out": args.out},
          text=f"{result}\nwrote {args.out} (the Ct fit writes no sensitivity plot; `bayespool "
               f"assay {args.out} --plot FILE` draws the implied curve)\n{CAUTION}")
    return 0


def _run_calibrate(args):
    from .calibration import calibrate
    from .calibration.plot import figure, plot_paths, write_plots
    from .calibration.validation import ValidationData
    if args.validation and (args.layout or args.readouts or args.samples):
        raise InputError("give either --validation or --layout/--readouts, not both")
    if not args.validation and not (args.layout and args.readouts):
        raise InputError("give --validation, or --layout and --readouts of past runs")
    fixed = {}
    for name, value in args.fix:
        if name in fixed:
            raise InputError(f"--fix gives {name!r} twice")
        fixed[name] = value
    plots = {} if args.no_plot else plot_paths(args.out)
    _check_outputs(args, {f"the {kind.upper()} plot beside --out": str(path)
                          for kind, path in plots.items()}, out=args.out, report=args.report)
    data = run = None
    words = _result_words(args)
    if args.validation:
        from .io import read_table
        table = read_table(args.validation, ["pool_size", "positives", "result"], "validation")
        if "ct" in table.header:
            return _run_calibrate_ct(args, table)
        data = ValidationData.read(args.validation, words=words)
    else:
        from .run import Run
        run = Run.read(args.layout, args.readouts, args.samples, result_words=words)
    result = calibrate(data, run, model=args.model, fixed=fixed, level=args.level,
                       intervals=args.intervals, gof_draws=args.gof_draws, seed=args.seed)
    if run is not None and not args.allow_unidentified:
        result.check_identified()
    fig = figure(result) if plots else None
    result.assay.write(args.out)
    if plots:
        write_plots(result, args.out, fig)
    written = [args.out] + [str(p) for p in plots.values()]
    if args.report:
        _write_report(args, run=run, assay=result.assay,
                      calibration=result, title="bayespool calibration report")
        written.append(args.report)
    if args.json:
        for w in result.warnings:
            _note(args, w)
    extra = {"out": args.out, "plots": {k: str(v) for k, v in plots.items()}}
    if args.report:
        extra["report"] = args.report
    _emit(args, result, extra=extra, text=f"{result}\nwrote {', '.join(written)}\n{CAUTION}")
    return 0


# ---- plan
def _add_plan(sub, shared):
    from .defaults import METHODS
    from .planning import DEFAULT_DRAWS, DEFAULT_MAX_LINKED, DEFAULT_MAX_POOL_SIZE, DEFAULT_MIN_INFORMATION
    p = sub.add_parser("plan", parents=[shared["first_stage"], shared["worklist"]],
                       help="the next most informative pools for the undecided samples",
                       description="Choose the next batch of pools by expected information gain "
                       "about the undecided samples, given the readouts so far. An empty layout "
                       "and readouts (header only) with a --samples list plan a first stage. "
                       + CAUTION)
    p.add_argument("--tests", type=int, required=True, metavar="N",
                   help="batch size: at most N pools (one readout each)")
    p.add_argument("--max-pool-size", type=int, default=DEFAULT_MAX_POOL_SIZE, metavar="K",
                   help="at most K samples per pool (default: %(default)s)")
    p.add_argument("--max-draws", type=int, default=None, metavar="N",
                   help="a sample may be drawn at most N more times in this batch (specimen "
                   "volume; a draws_left column of --samples sets it per sample); replicate "
                   "readings of an existing pool draw nothing")
    p.add_argument("--min-information", type=float, default=DEFAULT_MIN_INFORMATION,
                   metavar="BITS", help="leave out tests expected to tell fewer bits "
                   "(default: %(default)s)")
    p.add_argument("--max-linked", type=int, default=DEFAULT_MAX_LINKED, metavar="N",
                   help="at most N samples linked through shared pools after this batch, so the "
                   "next decode stays exact (default: %(default)s)")
    p.add_argument("--posterior-draws", type=int, default=DEFAULT_DRAWS, metavar="N",
                   help="joint posterior draws that information is estimated over "
                   "(default: %(default)s)")
    p.add_argument("--method", choices=METHODS, default="auto", help="decoder (default: auto)")
    p.add_argument("--out", required=True, metavar="CSV",
                   help="next pools: pool,sample,kind,positive_probability,information_bits,"
                   "follows_pool")
    return p


def _run_plan(args):
    from .decoders import decode
    from .planning import plan
    report = args.report
    _check_outputs(args, out=args.out, report=report, worklist=args.worklist)
    if args.worklist and not args.samples:
        raise InputError("--worklist needs --samples with the specimens' plate and well")
    run, assay = _load_inputs(args)
    if run.n_samples == 0:
        raise InputError("no samples: the layout is empty and no --samples file lists any",
                         args.layout)
    post = decode(run, assay, method=args.method, seed=args.seed, **_targets(args))
    result = plan(run, assay, posterior=post, tests=args.tests, max_pool_size=args.max_pool_size,
                  max_draws=args.max_draws, n_draws=args.posterior_draws, seed=args.seed,
                  min_information=args.min_information, max_linked=args.max_linked,
                  pool_volume=args.pool_volume if args.worklist else None)
    wl = None
    if args.worklist:
        frame = file_frame(result.to_frame())
        replicates = frame.loc[frame["kind"] == "replicate", "pool"].unique()
        samples = run.samples.copy()
        samples["sample"] = run.sample_ids[samples.index.to_numpy()]
        wl = _write_worklist(args, frame, samples, skip_pools=replicates)
    _write_table(result, args.out)
    check = args.control_check
    if report:
        _write_report(args, run=run, assay=assay, posterior=post, plan=result, controls=check,
                      worklist=wl)
    for w in post.warnings + result.notes + (check.messages if check is not None else []):
        _note(args, w)
    extra = {"samples": run.n_samples, "out": args.out, "assay": assay.describe(),
             "assay_uncertainty": args.assay_uncertainty}
    if wl is not None:
        extra["worklist"] = dict(wl.summary(), out=args.worklist)
    if check is not None:
        extra["controls"] = check.summary()
    if result.decided:
        text = f"{result}; wrote a header only to {args.out}"
    else:
        text = f"{result}; wrote {args.out}" + (f" and {report}" if report else "")
        if wl is not None:
            text += f"\n{wl}\nwrote {args.worklist}"
    _emit(args, result, extra=extra, text=text)
    return 0


# ---- prevalence
def _pair(text: str) -> tuple[float, float]:
    values = _float_list(text)
    if len(values) != 2:
        raise argparse.ArgumentTypeError(f"expected two numbers A,B, got {text!r}")
    return values[0], values[1]


def _names(text: str) -> list[str]:
    return [c.strip() for c in text.split(",") if c.strip()]


def _add_prevalence(sub, shared):
    from .defaults import PREVALENCE_INTERVALS as INTERVALS
    p = sub.add_parser("prevalence", parents=[shared["json"], shared["report"]], help="prevalence by group from pooled readouts (surveillance)",
                       description="Estimate the prevalence (for example an infection rate per "
                       "1000) by group from pools of any sizes, with an interval, the "
                       "bias-corrected estimate and the minimum infection rate; without --assay "
                       "the test is taken as perfect. Estimates describe the data and the assay "
                       "model given. " + CAUTION)
    src = p.add_argument_group("data (one of)")
    src.add_argument("--pools", metavar="CSV", help="pool,size,result[,group columns]: one row "
                     "per readout; several rows of one pool are replicates")
    src.add_argument("--layout", metavar="CSV", help="a run's pool,sample memberships (sizes)")
    src.add_argument("--readouts", metavar="CSV", help="the run's pool,result readouts")
    src.add_argument("--samples", metavar="CSV", help="the run's samples (group columns)")
    p.add_argument("--assay", metavar="TOML", help="assay model: Se(k, d) and Sp enter the "
                   "likelihood (default: a perfect test, as the classic estimators assume)")
    p.add_argument("--by", type=_names, default=[], metavar="COLS",
                   help="grouping columns, comma-separated (e.g. site,week)")
    p.add_argument("--interval", choices=INTERVALS, default=None,
                   help="interval method (default: skew-score, the skewness-corrected score "
                   "interval, or likelihood with --assay-uncertainty; exact needs equal pool "
                   "sizes)")
    p.add_argument("--assay-uncertainty", action="store_true",
                   help="integrate the likelihood over the fitted assay's uncertainty (the "
                   "[fit.uncertainty] table calibrate writes): one assay shared by every pool, so "
                   "its error widens the interval (intervals likelihood and bayes)")
    p.add_argument("--level", type=_probability, default=0.95, metavar="L",
                   help="confidence level (default: %(default)s)")
    p.add_argument("--per", type=_probability, default=1.0, metavar="N",
                   help="estimates per N specimens, e.g. 1000 (default: %(default)s)")
    p.add_argument("--prior", type=_pair, default=(1.0, 1.0), metavar="A,B",
                   help="Beta(A, B) prior for --interval bayes (default: 1,1)")
    p.add_argument("--compare", type=_names, default=None, metavar="A,B",
                   help="estimate the difference between groups A and B (automatic when --by "
                   "names one column with exactly two values)")
    p.add_argument("--out", metavar="CSV", help="write the estimates table")
    return p


def _run_prevalence(args):
    from .surveillance import estimate_prevalence, pools_from_run, read_pools
    if args.pools and (args.layout or args.readouts or args.samples):
        raise InputError("give either --pools or --layout/--readouts, not both")
    if not args.pools and not (args.layout and args.readouts):
        raise InputError("give --pools, or --layout and --readouts of a run")
    _check_outputs(args, out=args.out, report=args.report)
    inputs = [args.pools, args.layout, args.readouts, args.samples, args.assay]
    assay = _read_assay(args.assay)
    if args.pools:
        data = read_pools(args.pools)
    else:
        from .run import Run
        data = pools_from_run(Run.read(args.layout, args.readouts, args.samples))
    result = estimate_prevalence(data, assay, by=args.by, interval=args.interval,
                                 level=args.level, per=args.per, prior=args.prior,
                                 compare=args.compare, assay_uncertainty=args.assay_uncertainty)
    if args.out:
        _write_table(result, args.out)
    if args.report:
        _write_report(args, prevalence=result, title="bayespool prevalence report",
                      notes=[f"input: {v}" for v in inputs if v])
    written = [x for x in (args.out, args.report) if x]
    _emit(args, result, extra={k: v for k, v in (("out", args.out), ("report", args.report)) if v},
          text="\n".join([str(result)] + ([f"wrote {' and '.join(written)}"] if written else [])
                         + [CAUTION]))
    return 0


# ---- regress
def _add_regress(sub, shared):
    from .defaults import REGRESSION_LINKS
    p = sub.add_parser("regress", parents=[shared["json"], shared["seed"]], help="individual risk on covariates from pooled readouts "
                       "(group testing regression); fitted risks as priors",
                       description="Fit each specimen's risk on its covariates (columns of the "
                       "samples file) from pooled readouts of any layout, by maximum likelihood "
                       "on the exact marginal likelihood of the readouts (EM over the latent "
                       "statuses), or Monte Carlo EM with the Gibbs sampler for large linked "
                       "groups. Without --assay the test is taken as perfect. Estimates describe "
                       "the data and the assay model given. " + CAUTION)
    p.add_argument("--layout", required=True, metavar="CSV", help="pool,sample memberships")
    p.add_argument("--readouts", required=True, metavar="CSV", help="pool,result readouts "
                   "(individual follow-up tests are pools of one)")
    p.add_argument("--samples", required=True, metavar="CSV",
                   help="sample plus the covariate columns the formula uses")
    p.add_argument("--assay", metavar="TOML", help="assay model (default: a perfect test)")
    p.add_argument("--formula", required=True, metavar="F",
                   help="covariates in formula syntax, e.g. \"age + C(site)\"")
    p.add_argument("--link", choices=REGRESSION_LINKS, default="logit",
                   help="link of risk to covariates (default: %(default)s)")
    p.add_argument("--method", choices=("auto", "exact", "gibbs"), default="auto",
                   help="E-step: exact enumeration of linked groups, or the Gibbs sampler "
                   "(default: %(default)s, exact when every linked group has at most 22 samples)")
    p.add_argument("--level", type=_probability, default=0.95, metavar="L",
                   help="level of the coefficient intervals (default: %(default)s)")
    p.add_argument("--out", metavar="CSV", help="write the coefficients: "
                   "term,estimate,std_error,lower,upper")
    p.add_argument("--priors", metavar="CSV", help="write the samples file with a prior column "
                   "from the fitted risks (for decode, plan and design)")
    return p


def _run_regress(args):
    from .assay import PERFECT_ASSAY
    from .io import write_frame
    from .run import Run
    from .surveillance.regression import fit_regression
    _check_outputs(args, out=args.out, priors=args.priors)
    assay = _read_assay(args.assay)
    run = Run.read(args.layout, args.readouts, args.samples)
    run = run.with_sources(assay=args.assay)
    try:
        fit = fit_regression(run, assay or PERFECT_ASSAY, formula=args.formula, link=args.link,
                             method=args.method, level=args.level, seed=args.seed)
    except ImpossibleEvidenceError as exc:
        if args.assay:
            raise
        raise InputError(exc.message + " (no --assay was given, so the test is taken as "
                         "perfect; give the assay file)", exc.file, exc.line, exc.column) from None
    if args.out:
        write_frame(fit.coefficients(), args.out)
    if args.priors:
        write_frame(fit.priors_frame(), args.priors)
    if not args.assay:
        _note(args, "no --assay given: the test is taken as perfect (Se = Sp = 1)")
    for n in fit.notes:
        _note(args, n)
    written = [x for x in (args.out, args.priors) if x]
    extra = {"assay": assay.describe() if assay else "perfect (Se = Sp = 1)"}
    extra.update({k: v for k, v in (("out", args.out), ("priors", args.priors)) if v})
    _emit(args, fit, extra=extra,
          text="\n".join([str(fit)] + ([f"wrote {' and '.join(written)}"] if written else [])
                         + [CAUTION]))
    return 0


COMMANDS = {
    "assay": (_add_assay, _run_assay),
    "decode": (_add_decode, _run_decode),
    "demo": (_add_demo, _run_demo),
    "design": (_add_design, _run_design),
    "simulate": (_add_simulate, _run_simulate),
    "calibrate": (_add_calibrate, _run_calibrate),
    "plan": (_add_plan, _run_plan),
    "prevalence": (_add_prevalence, _run_prevalence),
    "regress": (_add_regress, _run_regress),
}


def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(prog="bayespool", description="Pooled testing with an imperfect assay: "
                     "per-specimen probabilities, next tests, assay calibration. " + CAUTION)
    from . import __version__
    parser.add_argument("--version", action="version", version=f"bayespool {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    shared = _shared_options()
    for add, _ in COMMANDS.values():
        add(sub, shared)
    return parser


def main(argv=None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    args.argv = list(sys.argv[1:] if argv is None else argv)
    if args.command is None:
        parser.print_help()
        return 2
    _, run = COMMANDS[args.command]
    args.pending_notes = []
    try:
        with warnings.catch_warnings(), spelled_as(flag):
            warnings.simplefilter("ignore", UserWarning)
            code = run(args)
        for note in args.pending_notes:
            print(note, file=sys.stderr)
        return code
    except InputError as exc:
        print(f"bayespool {args.command}: error: {exc.renamed(flag)}", file=sys.stderr)
        return 2
    except OSError as exc:
        name = getattr(exc, "filename", None)
        print(f"bayespool {args.command}: error: {name + ': ' if name else ''}"
              f"{exc.strerror or exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print(f"bayespool {args.command}: interrupted", file=sys.stderr)
        return 130


def console() -> None:
    """The console entry point: run ``main`` and leave without interpreter teardown.

    Tearing down numpy, pandas and numba at exit costs about a quarter of a second on every
    command; all outputs are already closed (atomic renames) when ``main`` returns, so only the
    standard streams need flushing.
    """
    code = main()
    sys.stdout.flush()
    sys.stderr.flush()
    os._exit(code)
