"""Conserved charges: one integer per local basis state, for one or several quantities.

Text form (the ``--charges`` flag)
----------------------------------
A *charge list* gives one integer per local basis state, in basis order::

    0,1            qubits: number of up spins (or of particles)
    -1,0,1         spin 1: S^z
    0,1,1,2        a spinful orbital |0>, |up>, |dn>, |updn>: particle number

Several conserved quantities at once are separated by semicolons, one list per
quantity, all of the same length; every charge is then a list::

    0,1,1,2;0,1,-1,0     particle number N and 2 S^z of a spinful orbital

Sites whose local dimensions differ take the per-site form: *site groups*
separated by ``/``, each ``COUNT*LISTS`` (COUNT consecutive sites with these
charges) or ``*LISTS`` (all the sites not covered by the other groups; at
most one such group).  A group without a count covers one site::

    1,-1/*2,0,-2/1,-1    spin-1/2 edge sites around a spin-1 bulk (2 S^z)
    4*0,1/4*-1,0,1       four qubits, then four spin-1 sites

A plain list (no ``/``) applies to every site.

Moduli (the ``--modulus`` flag)
-------------------------------
One integer per quantity, comma-separated: ``M >= 2`` makes the quantity a
Z_M charge (its values are taken modulo M), ``0`` leaves it an unbounded
integer (U(1)) charge.  Parity is ``--charges 0,1 --modulus 2``.

Python values
-------------
``charges`` may be the text above; a sequence of integers (one quantity); a
sequence of equal-length integer sequences (several quantities); or, per
site, a list of ``(count, lists)`` pairs with ``count`` an integer or None
(the rest), e.g. ``[(1, [1, -1]), (None, [2, 0, -2]), (1, [1, -1])]``.
``modulus`` is None, an integer, text, or a sequence of integers.

Charges are carried as int64 arrays whose last axis runs over the quantities;
a single charge value is keyed by a tuple of Python ints.
"""

import re
from numbers import Integral

import numpy as np

__all__ = ["ChargeSpec", "ChainCharges", "parse_charges", "charge_options", "FLOWS"]

FLOWS = ("rightward", "leftward")

_COUNTED = re.compile(r"^\s*(\d*)\s*\*(.*)$")


def _integer(value, where):
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, Integral):
        raise ValueError(f"{where}: {value!r} is not an integer; charges are integers, "
                         "one per local basis state")
    return int(value)


def _list_from_text(text, where):
    items = [t.strip() for t in text.split(",")]
    if not text.strip() or any(not t for t in items):
        raise ValueError(f"{where}: empty entry in charge list {text.strip()!r}; expected "
                         "comma-separated integers such as 0,1")
    out = []
    for t in items:
        try:
            out.append(int(t))
        except ValueError:
            raise ValueError(f"{where}: {t!r} is not an integer in charge list "
                             f"{text.strip()!r}; charges are integers such as 0,1") from None
    return out


def _table(quantities, where):
    """Charge lists (one per quantity) -> int64 array (d, n_quantities)."""
    lengths = {len(q) for q in quantities}
    if len(lengths) != 1:
        shown = ", ".join(str(len(q)) for q in quantities)
        raise ValueError(f"{where}: the charge lists of the {len(quantities)} quantities have "
                         f"lengths {shown}; each needs one integer per local basis state")
    if 0 in lengths:
        raise ValueError(f"{where}: empty charge list")
    return np.array(quantities, dtype=np.int64).T.copy()


def _group_from_text(text, where):
    m = _COUNTED.match(text)
    count, body = (1, text) if m is None else (int(m.group(1)) if m.group(1) else None,
                                                m.group(2))
    if count == 0:
        raise ValueError(f"{where}: group {text.strip()!r} covers 0 sites; use a count >= 1")
    lists = [_list_from_text(part, where) for part in body.split(";")]
    return count, _table(lists, where)


def _group_from_value(value, where):
    if isinstance(value, str):
        return _group_from_text(value, where)[1]
    seq = list(np.asarray(value, dtype=object).tolist()) if isinstance(value, np.ndarray) \
        else list(value)
    if not seq:
        raise ValueError(f"{where}: empty charge list")
    if all(not isinstance(v, (list, tuple, np.ndarray)) for v in seq):
        return _table([[_integer(v, where) for v in seq]], where)
    lists = []
    for q in seq:
        if isinstance(q, (str, bytes)) or not hasattr(q, "__len__"):
            raise ValueError(f"{where}: mixes integers and lists; give one list of integers "
                             "per conserved quantity")
        lists.append([_integer(v, where) for v in q])
    return _table(lists, where)


def _is_group_pair(item):
    return (isinstance(item, (tuple, list)) and len(item) == 2
            and (item[0] is None or isinstance(item[0], Integral))
            and not isinstance(item[0], bool)
            and isinstance(item[1], (list, tuple, str, np.ndarray)))


def _parse_moduli(modulus, quantities):
    if modulus is None:
        return (0,) * quantities
    if isinstance(modulus, str):
        values = _list_from_text(modulus, "modulus")
    elif isinstance(modulus, Integral) and not isinstance(modulus, bool):
        values = [int(modulus)]
    else:
        values = [_integer(m, "modulus") for m in modulus]
    if len(values) != quantities:
        raise ValueError(f"modulus: {len(values)} value(s) for {quantities} conserved "
                         "quantit" + ("y" if quantities == 1 else "ies") + "; give one per "
                         "quantity, 0 for an unbounded (U(1)) charge")
    for m in values:
        if m < 0 or m == 1:
            raise ValueError(f"modulus: {m} is not a valid modulus; use M >= 2 for a Z_M "
                             "charge or 0 for an unbounded (U(1)) charge")
    return tuple(values)


class ChargeSpec:
    """Local charges of every site and the moduli of the conserved quantities.

    Parameters
    ----------
    groups : list of (int or None, ndarray)
        Site groups in chain order: a site count (None: every site not covered
        by the other groups) and the int64 charge table (d, n_quantities).
    moduli : tuple of int
        One per quantity; 0 for an unbounded integer charge, M >= 2 for Z_M.

    Build one with :func:`parse_charges`; bind it to a chain with :meth:`bind`.
    """

    def __init__(self, groups, moduli):
        self.groups = [(c, t) for c, t in groups]
        self.moduli = tuple(int(m) for m in moduli)

    @property
    def quantities(self):
        return self.groups[0][1].shape[1]

    def text(self):
        """The spec in its CLI text form (round-trips through :func:`parse_charges`)."""
        parts = []
        for count, table in self.groups:
            lists = ";".join(",".join(str(int(v)) for v in col) for col in table.T)
            if len(self.groups) == 1 and count is None:
                return lists
            parts.append(("*" if count is None else f"{count}*") + lists)
        return "/".join(parts)

    def expand(self, sites, where="charges"):
        """The charge table (d, n_quantities) of each of ``sites`` sites, in chain order.

        Raises
        ------
        ValueError
            The site groups cover a different number of sites.
        """
        fixed = sum(c for c, _ in self.groups if c is not None)
        rest = sites - fixed
        if rest < 0 or (rest and not any(c is None for c, _ in self.groups)):
            raise ValueError(f"{where}: the site groups of {self.text()!r} cover {fixed} "
                             f"sites, the state has {sites}; adjust the counts or add a '*' "
                             "group for the remaining sites")
        tables = []
        for count, table in self.groups:
            tables += [table] * (rest if count is None else count)
        return tables

    def bind(self, local_dims, labels=None, where="charges"):
        """Charges of each site of a chain with these local dimensions.

        Parameters
        ----------
        local_dims : sequence of int
            Local dimension per site.
        labels : sequence, optional
            Site labels for messages (default 0..N-1).

        Returns
        -------
        ChainCharges

        Raises
        ------
        ValueError
            The groups cover a different number of sites, or a site's charge list
            has a length other than its local dimension.
        """
        labels = list(range(len(local_dims))) if labels is None else list(labels)
        tables = self.expand(len(local_dims), where)
        for i, (d, table) in enumerate(zip(local_dims, tables)):
            if table.shape[0] != d:
                lists = ";".join(",".join(str(int(v)) for v in col) for col in table.T)
                raise ValueError(f"{where}: site {labels[i]} has local dimension {d}, but "
                                 f"its charge list {lists} has {table.shape[0]} entries; give "
                                 "one integer per local basis state (per-site form "
                                 "'COUNT*LIST/...', docs/charges.md)")
        return ChainCharges(tables, self.moduli)


def parse_charges(charges, modulus=None):
    """A :class:`ChargeSpec` from CLI text or Python values (module docstring).

    Parameters
    ----------
    charges : str, sequence, list of (count, lists) pairs, or ChargeSpec
    modulus : None, int, str or sequence of int
        One per quantity; 0 for an unbounded integer charge.

    Returns
    -------
    ChargeSpec

    Raises
    ------
    ValueError
        Non-integer charges, lists of unequal lengths, a bad group, a bad
        modulus or a number of moduli other than the number of quantities.
    TypeError
        ``charges`` of an unsupported type.

    Examples
    --------
    >>> spec = parse_charges("0,1,1,2;0,1,-1,0")
    >>> spec.quantities, spec.moduli
    (2, (0, 0))
    >>> parse_charges([0, 1], modulus=2).bind([2, 2]).total([1, 1])
    (0,)
    """
    if isinstance(charges, ChargeSpec):
        if modulus is not None and _parse_moduli(modulus, charges.quantities) != \
                charges.moduli:
            raise ValueError("modulus: given both in the charge spec and separately, "
                             "with different values; give it once")
        return charges
    if isinstance(charges, str):
        if not charges.strip():
            raise ValueError("charges: empty; give one integer per local basis state, "
                             "e.g. 0,1")
        groups = [_group_from_text(g, f"charges group {k + 1}" if "/" in charges
                                   else "charges")
                  for k, g in enumerate(charges.split("/"))]
        if "/" not in charges and groups[0][0] == 1 and not _COUNTED.match(charges):
            groups = [(None, groups[0][1])]
    elif isinstance(charges, (list, tuple, np.ndarray)):
        seq = list(charges)
        if seq and _is_group_pair(seq[0]):
            groups = []
            for k, item in enumerate(seq):
                if not _is_group_pair(item):
                    raise ValueError(f"charges group {k + 1}: expected a (count, lists) pair "
                                     f"like the others, found {item!r}")
                count = item[0]
                if count is not None and count < 1:
                    raise ValueError(f"charges group {k + 1}: count {count} is not >= 1 "
                                     "(None covers the remaining sites)")
                groups.append((count, _group_from_value(item[1], f"charges group {k + 1}")))
        else:
            groups = [(None, _group_from_value(seq, "charges"))]
    else:
        raise TypeError(f"charges must be text, a list of integers, a list of lists or "
                        f"(count, lists) pairs; found {type(charges).__name__}")
    if sum(c is None for c, _ in groups) > 1:
        raise ValueError("charges: more than one '*' group (the remaining sites); give "
                         "counts to all but one")
    widths = {t.shape[1] for _, t in groups}
    if len(widths) != 1:
        raise ValueError("charges: the site groups give different numbers of conserved "
                         f"quantities ({', '.join(str(t.shape[1]) for _, t in groups)}); "
                         "every group needs one list per quantity")
    moduli = _parse_moduli(modulus, widths.pop())
    return ChargeSpec(groups, moduli)


def charge_options(charges, modulus, label):
    """Validated ``charges``/``modulus`` options: (canonical text or None, moduli or None).

    ``label(name)`` names an option in messages (parameter and CLI flag).

    Raises
    ------
    ValueError, TypeError
        As :func:`parse_charges`, the message naming the option; a modulus
        without charges.
    """
    if charges is None:
        if modulus is not None:
            raise ValueError(f"{label('modulus')} needs local charges ({label('charges')})")
        return None, None
    try:
        spec = parse_charges(charges, modulus)
    except ValueError as exc:
        name, _, rest = str(exc).partition(":")
        if name.split()[0] in ("charges", "modulus"):
            raise ValueError(f"{label(name.split()[0])}{name[len(name.split()[0]):]}:{rest}") \
                from None
        raise
    return spec.text(), spec.moduli


class ChainCharges:
    """Local charges bound to the sites of one chain, with charge arithmetic.

    Attributes
    ----------
    sites : list of ndarray
        Per site, the int64 table (d_i, n_quantities), reduced by the moduli.
    moduli : tuple of int
    """

    def __init__(self, tables, moduli):
        self.moduli = tuple(moduli)
        self._mod = np.array([m if m else 0 for m in self.moduli], dtype=np.int64)
        self.sites = [self.reduce(t) for t in tables]

    @property
    def quantities(self):
        return len(self.moduli)

    @property
    def cyclic(self):
        """True for each quantity that is a Z_M charge."""
        return tuple(m > 0 for m in self.moduli)

    def reduce(self, charges):
        """Charges taken modulo each quantity's modulus (last axis: quantities)."""
        a = np.asarray(charges, dtype=np.int64)
        if not self._mod.any():
            return a
        return np.where(self._mod > 0, np.mod(a, np.where(self._mod > 0, self._mod, 1)), a)

    def add(self, a, b):
        """a + b with the moduli applied (broadcasting)."""
        return self.reduce(np.asarray(a, dtype=np.int64) + np.asarray(b, dtype=np.int64))

    def sub(self, a, b):
        """a - b with the moduli applied (broadcasting)."""
        return self.reduce(np.asarray(a, dtype=np.int64) - np.asarray(b, dtype=np.int64))

    def key(self, charge):
        """Hashable key (tuple of ints) of one charge."""
        return tuple(int(v) for v in self.reduce(np.reshape(charge, -1)))

    def total(self, states):
        """Total charge of the product basis state with local states ``states`` (a key)."""
        out = np.zeros(self.quantities, dtype=np.int64)
        for table, s in zip(self.sites, states):
            out = out + table[s]
        return self.key(out)

    def block(self, sites):
        """Charges of every basis state of consecutive ``sites`` (range), first slowest.

        Returns an int64 array (prod d, n_quantities).  Memory: that many rows.
        """
        out = np.zeros((1, self.quantities), dtype=np.int64)
        for i in sites:
            t = self.sites[i]
            out = self.add(out[:, None, :], t[None, :, :]).reshape(-1, self.quantities)
        return out

    def spec_text(self):
        """The per-site charges as CLI text (runs of equal sites as counted groups)."""
        groups = []
        for table in self.sites:
            if groups and np.array_equal(groups[-1][1], table):
                groups[-1][0] += 1
            else:
                groups.append([1, table])
        if len(groups) == 1:
            return ChargeSpec([(None, groups[0][1])], self.moduli).text()
        return ChargeSpec([tuple(g) for g in groups], self.moduli).text()

    def label(self, key):
        """A charge as written in documents: an int for one quantity, else a list."""
        return int(key[0]) if self.quantities == 1 else [int(v) for v in key]

    def text(self, key):
        """A charge as printed: ``2`` or ``(2,-1)``."""
        return str(int(key[0])) if self.quantities == 1 else \
            "(" + ",".join(str(int(v)) for v in key) + ")"
