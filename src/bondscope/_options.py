"""Profiling options: defined, validated and normalised once.

:class:`ProfileOptions` holds every option that decides how a checkpoint is
read and profiled.  ``profile``, ``inspect``, ``run_batch``, the analyses and
the figures all take these options, either as a ``ProfileOptions`` or as
keywords checked by :meth:`ProfileOptions.from_kwargs`, so a misspelt option
raises TypeError everywhere.  The CLI builds one from its flags
(``bondscope._cli._common``), one flag per field, named after it.
"""

import dataclasses
import difflib
import math
import os
from numbers import Integral, Real

__all__ = ["ProfileOptions", "LAYOUT", "BLOCK_LAYOUT", "MEASURES", "RESOURCES", "RUN_META",
           "option_label"]

LAYOUT = ("state", "tensors", "local_dim", "axes", "complex_parts", "unit_cell")
# block-sparse checkpoints (bondscope._blocksparse)
BLOCK_LAYOUT = ("blocks", "block_form", "charge_flow")
MEASURES = ("renyi", "base", "spectrum", "bond_dim", "weight_tol", "route", "precision",
            "charges", "modulus", "disentangle", "parity")
# how a profile is computed, not what it holds (left out of a batch result's record)
RESOURCES = ("scratch", "max_memory", "threads", "transfer_iterations")
# root attribute names of the run metadata (bondscope._runinfo); read afresh, not recorded
RUN_META = ("time_attr", "bond_dim_attr", "weight_attr")
ROUTES = ("auto", "gram", "svd")
PRECISIONS = ("promote", "stored")


def option_label(name):
    """'bond_dim (--bond-dim)': the Python parameter and the CLI flag of an option."""
    return f"{name} (--{name.replace('_', '-')})"


def _integer(value, name, low):
    if isinstance(value, bool) or not isinstance(value, Integral) or value < low:
        raise ValueError(f"{option_label(name)} must be an integer >= {low}, found {value!r}")
    return int(value)


def _log_base(base):
    """(label written to documents, value) of a log base: ("e", e), (2, 2.0), ..."""
    from ._document import parse_log_base

    try:
        value = parse_log_base("e" if base is None else base)
    except (TypeError, ValueError):
        raise ValueError(f"{option_label('base')} must be 'e' or a finite number > 1, "
                         f"found {base!r}") from None
    if value == math.e:
        return "e", value
    return (int(value) if value.is_integer() else value), value


def _local_dim(value):
    if value is None:
        return None
    if isinstance(value, (list, tuple)):
        return tuple(_integer(d, "local_dim", 1) for d in value)
    return _integer(value, "local_dim", 2)


def _spectrum(value):
    if value is None or value is False:
        return False
    if value is True:
        return True
    return _integer(value, "spectrum", 1)


def _parity(value):
    if value is None:
        return None
    items = value.split(",") if isinstance(value, str) else list(value)
    try:
        bits = tuple(int(str(v).strip()) for v in items)
    except ValueError:
        bits = ()
    if len(bits) < 2 or any(b not in (0, 1) for b in bits):
        raise ValueError(f"{option_label('parity')} must list 0 or 1 for each local basis "
                         f"state (at least two), e.g. 0,1 or 0,1,1,0; found {value!r}")
    return bits


@dataclasses.dataclass(frozen=True)
class ProfileOptions:
    """How to read a checkpoint and what to compute at every cut.

    Parameters
    ----------
    state : str, optional
        Dataset holding a state vector (1-D with ``local_dim``, or shaped (d_1, ..., d_N)).
    tensors : str, optional
        Site tensor datasets, a pattern with a ``{site}`` placeholder, e.g. ``/run/psi/T{site}``.
    local_dim : int or sequence of int, optional
        Local dimension(s) of a 1-D state vector (default 2).
    axes : str or sequence of str, optional
        Stored axis order of the site tensors, a permutation of left,phys,right
        (inferred from how the bonds chain when omitted).
    complex_parts : {"auto", "last-axis", "none"}
        A state vector's real and imaginary parts in a last axis of length 2:
        found from the shape (default), forced, or never.
    renyi : str, float or sequence of them
        Rényi orders, e.g. ``("0.5", 2, "inf")``; kept as the keys they are written under.
    base : "e" or float
        Logarithm base of all entropies (2 for bits).
    spectrum : bool or int
        Store the Schmidt values above each cut's resolution floor (True), or
        the K largest of them.
    bond_dim, weight_tol : int, float, optional
        A truncation to report (per cut kept rank and discarded weight; for the
        state the exact infidelity of successive truncation).
    route : {"auto", "gram", "svd"}
        State-vector route: Gram matrices (fast), per-cut SVDs (resolves small
        values), or auto (svd up to 2^14 amplitudes).
    precision : {"promote", "stored"}
        Compute single-precision data in double (default) or as stored.
    scratch : str, optional
        Directory for spilled bond matrices.
    max_memory : int, optional
        Refuse work whose estimate exceeds this many bytes (default: available memory).
    threads : int, optional
        BLAS/LAPACK threads for the duration of the work.
    charges : str or sequence, optional
        Local charges, one integer per local basis state (several quantities,
        per-site groups: see :mod:`bondscope._charges`); adds the
        charge-resolved spectra to every cut.  Kept as canonical text.
    modulus : int, str or sequence of int, optional
        One per quantity: M >= 2 makes it a Z_M charge, 0 an integer charge.
    blocks : str, optional
        Block-sparse checkpoint: site group pattern with ``{site}``.
    block_form : {"blocks", "packed", "labelled"}, optional
        Block-sparse form (found from the groups' members when omitted).
    charge_flow : {"rightward", "leftward"}
        Block conservation rule: q_right = q_left + q_phys, or q_left = q_right + q_phys.
    time_attr, bond_dim_attr, weight_attr : str, optional
        Root attributes holding the run's time, bond dimension and discarded
        weight (default ``time``, ``bond_dim``, ``max_discarded_weight``).
    disentangle : bool
        Purifications: also the cut entropy after optimising ancilla unitaries
        beside each cut (docs/mixed.md).
    unit_cell : bool, optional
        Read the site tensors as the unit cell of an infinite chain (True), never
        (False), or when the bonds close into a cell with a bond other than 1
        (None, default); see :mod:`bondscope._cellsource`.
    transfer_iterations : int, optional
        Unit cells: iteration limit of the transfer-matrix eigensolver
        (default scipy's, 10 chi^2).
    parity : str or sequence of int, optional
        Fermion parity (0 or 1) of each local basis state, e.g. ``"0,1,1,0"``:
        the sites are fermionic modes in Jordan-Wigner order (used by
        :func:`bondscope.mutual_information`).  Kept as a tuple of ints.

    Raises
    ------
    ValueError
        A value out of range; the message names the parameter and its CLI flag.

    Examples
    --------
    >>> opts = ProfileOptions(renyi=[2, "inf"], bond_dim=16)
    >>> opts.renyi, opts.truncating
    (('2', 'inf'), True)
    >>> ProfileOptions.from_kwargs(bond_dimm=16)
    Traceback (most recent call last):
    ...
    TypeError: unknown profiling option 'bond_dimm' (did you mean 'bond_dim'?)
    """

    state: str = None
    tensors: str = None
    local_dim: object = None
    axes: tuple = None
    complex_parts: str = "auto"
    renyi: tuple = ()
    base: object = "e"
    spectrum: object = False
    bond_dim: int = None
    weight_tol: float = None
    route: str = "auto"
    precision: str = "promote"
    scratch: str = None
    max_memory: int = None
    threads: int = None
    charges: object = None
    modulus: tuple = None
    blocks: str = None
    block_form: str = None
    charge_flow: str = "rightward"
    time_attr: str = None
    bond_dim_attr: str = None
    weight_attr: str = None
    disentangle: bool = False
    unit_cell: bool = None
    transfer_iterations: int = None
    parity: tuple = None

    def __post_init__(self):
        from ._measure import renyi_orders

        put = lambda name, value: object.__setattr__(self, name, value)  # noqa: E731
        for name in ("state", "tensors", *RUN_META):
            value = getattr(self, name)
            if value is not None and not isinstance(value, str):
                what = "an attribute name" if name in RUN_META else "a dataset path"
                raise TypeError(f"{option_label(name)} must be {what} (str), found "
                                f"{type(value).__name__}")
        if self.state is not None and self.tensors is not None:
            raise ValueError("give either a state dataset (state=, --state) or a tensor "
                             "pattern (tensors=, --tensors), not both")
        if self.tensors is not None and "{site}" not in self.tensors:
            raise ValueError(f"{option_label('tensors')} {self.tensors!r} has no {{site}} "
                             "placeholder, e.g. /run/psi/T{site}")
        put("local_dim", _local_dim(self.local_dim))
        if self.axes is not None:
            from ._source import parse_axes

            put("axes", parse_axes(self.axes))
        put("renyi", tuple(renyi_orders(self.renyi if self.renyi is not None else ())))
        put("base", _log_base(self.base)[0])
        put("spectrum", _spectrum(self.spectrum))
        if self.bond_dim is not None:
            put("bond_dim", _integer(self.bond_dim, "bond_dim", 1))
        if self.weight_tol is not None:
            tol = self.weight_tol
            if isinstance(tol, bool) or not isinstance(tol, Real) or not 0 <= tol < 1:
                raise ValueError(f"{option_label('weight_tol')} must be in [0, 1), "
                                 f"found {tol!r}")
            put("weight_tol", float(tol))
        from ._vectorshape import PARTS

        for name, allowed in (("route", ROUTES), ("precision", PRECISIONS),
                              ("complex_parts", PARTS)):
            if getattr(self, name) not in allowed:
                raise ValueError(f"{option_label(name)} must be one of {', '.join(allowed)}, "
                                 f"found {getattr(self, name)!r}")
        if self.scratch is not None:
            put("scratch", os.fspath(self.scratch))
        if self.max_memory is not None:
            put("max_memory", _integer(self.max_memory, "max_memory", 1))
        if self.threads is not None:
            put("threads", _integer(self.threads, "threads", 1))
        if self.unit_cell not in (None, True, False):
            raise ValueError(f"{option_label('unit_cell')} must be True, False or None, "
                             f"found {self.unit_cell!r}")
        if self.transfer_iterations is not None:
            put("transfer_iterations", _integer(self.transfer_iterations,
                                                "transfer_iterations", 1))
        self._check_charges(put)
        if not isinstance(self.disentangle, bool):
            raise ValueError(f"{option_label('disentangle')} must be True or False, found "
                             f"{self.disentangle!r}")
        put("parity", _parity(self.parity))

    def _check_charges(self, put):
        from ._blocksparse import FORMS
        from ._charges import FLOWS, charge_options

        charges, moduli = charge_options(self.charges, self.modulus, option_label)
        put("charges", charges)
        put("modulus", moduli)
        if self.blocks is not None:
            if not isinstance(self.blocks, str) or "{site}" not in self.blocks:
                raise ValueError(f"{option_label('blocks')} {self.blocks!r} needs a {{site}} "
                                 "placeholder, e.g. /state/site{site}")
            if self.state is not None or self.tensors is not None:
                raise ValueError(f"give {option_label('blocks')} or a dense layout "
                                 "(state=, tensors=), not both")
        for name, allowed in (("block_form", (None, *FORMS)), ("charge_flow", FLOWS)):
            if getattr(self, name) not in allowed:
                raise ValueError(f"{option_label(name)} must be one of "
                                 f"{', '.join(a for a in allowed if a)}, found "
                                 f"{getattr(self, name)!r}")

    @classmethod
    def from_kwargs(cls, options=None, **kwargs):
        """Options from a ProfileOptions (or None) updated by keywords.

        Raises
        ------
        TypeError
            An unknown keyword (with the nearest known name), or ``options``
            that is not a ProfileOptions.
        ValueError
            A value out of range.
        """
        if options is not None and not isinstance(options, cls):
            raise TypeError(f"options must be a ProfileOptions, found {type(options).__name__}")
        known = [f.name for f in dataclasses.fields(cls)]
        for name in kwargs:
            if name not in known:
                near = difflib.get_close_matches(name, known, n=1)
                hint = f" (did you mean {near[0]!r}?)" if near else \
                    f"; profiling options are {', '.join(known)}"
                raise TypeError(f"unknown profiling option {name!r}{hint}")
        base = options if options is not None else cls()
        return dataclasses.replace(base, **kwargs) if kwargs else base

    def replace(self, **kwargs):
        """A copy with some options changed (validated like the constructor)."""
        return type(self).from_kwargs(self, **kwargs)

    @property
    def layout(self):
        """The layout options as keywords of :func:`bondscope.open_source`."""
        return {name: getattr(self, name) for name in LAYOUT}

    @property
    def base_value(self):
        """The logarithm base as a float."""
        return _log_base(self.base)[1]

    @property
    def truncating(self):
        return self.bond_dim is not None or self.weight_tol is not None

    def to_dict(self):
        """Every option as JSON-ready values."""
        out = dataclasses.asdict(self)
        out["renyi"] = list(self.renyi)
        for name in ("local_dim", "axes", "modulus", "parity"):
            if isinstance(out[name], tuple):
                out[name] = list(out[name])
        return out

    def recorded(self):
        """The options that decide a profile's content (resources and run-metadata names
        left out), as JSON values."""
        # parity only matters to mutual information; left out when unset so that batch
        # records written before it existed still match
        return {k: v for k, v in self.to_dict().items()
                if k not in (*RESOURCES, *RUN_META) and not (k == "parity" and v is None)}
