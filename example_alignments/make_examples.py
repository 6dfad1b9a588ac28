#!/usr/bin/env python3
"""Regenerate the bundled demo alignments of cladewright.

The organisms, islands and genes are invented: a genus of cave-dwelling glass
snails, *Lucivitra*, from the fictional Vellmar Archipelago.  Sequences are
simulated along known random trees, so the trees a user builds from them can be
compared with the truth.

Files written (into ``--out DIR``, default: the folder of this script):

* ``glass_snails_coi.fasta`` / ``.nex`` -- 30 x 900 nucleotide alignment, HKY85
  model, kappa = 4, unequal base frequencies, discrete gamma rates (alpha 0.5);
* ``glass_snails_coi.true.nwk`` -- the tree it was simulated along;
* ``glass_snails_shell.fasta`` -- 20 x 300 amino-acid alignment, equal-input
  (F81-like) 20-state model with unequal frequencies and gamma rates;
* ``glass_snails_shell.true.nwk`` -- its tree.

Only numpy and the standard library are used; the output is byte-identical
from run to run (fixed seed, fixed formatting).
Example: ``python example_alignments/make_examples.py --out /tmp/demo``

References: Hasegawa, Kishino & Yano (1985) J. Mol. Evol. 22:160-174 (HKY85);
Felsenstein (1981) J. Mol. Evol. 17:368-376 (equal input); Yang (1994) J. Mol.
Evol. 39:306-314 (discrete gamma); NC-IUB (1985) ambiguity codes; Maddison,
Swofford & Maddison (1997) Syst. Biol. 46:590-621 (NEXUS); Newick format: the
trade's de facto standard (1986 informal specification).
"""
from __future__ import annotations

import argparse
import os

import numpy as np

SEED = 19851606
NUCLEOTIDES = "ACGT"
AMINO_ACIDS = "ACDEFGHIKLMNPQRSTVWY"
# AT-rich composition, typical of invertebrate mitochondrial DNA (common practice).
COI_FREQS = np.array([0.30, 0.16, 0.16, 0.38])
# Approximate amino-acid composition of globular proteins (from memory), in
# AMINO_ACIDS order; renormalised below so it sums to one exactly.
SHELL_FREQS = np.array([0.080, 0.015, 0.055, 0.065, 0.040, 0.070, 0.023, 0.055,
                        0.058, 0.095, 0.024, 0.040, 0.047, 0.040, 0.050, 0.068,
                        0.055, 0.068, 0.013, 0.032])
SHELL_FREQS = SHELL_FREQS / SHELL_FREQS.sum()

GENUS = "Lucivitra"
EPITHETS = ["opalina", "umbrivaga", "glaucilla", "noctilustris", "tenebricola",
            "lampadina", "crystallea", "ferrisoma", "pallidiventris", "argyrostoma"]
ISLANDS = ["Quellith", "Varnholm", "Ostrevin", "Tallunde", "Myrrask", "Orrindel"]
# Two-fold NC-IUB (1985) codes that contain each base, so an ambiguity stays
# consistent with the simulated truth.
IUPAC_WITH_BASE = {"A": "RMW", "C": "YMS", "G": "RKS", "T": "YKW"}


# --------------------------------------------------------------------------- trees
class RandomTree:
    """An unrooted binary tree as parent/length arrays.

    Leaves are nodes ``0..n-1``; internal nodes get increasing ids as they are
    created, so every parent id exceeds its children's ids: descending id order
    is a preorder and ascending id order a postorder, with no recursion.
    Parameters: parent (int64 array, -1 at the root), length (float64 array,
    branch to the parent, nan at the root), names (leaf names by leaf id).
    """

    def __init__(self, parent, length, names=None):
        self.parent = parent
        self.length = length
        self.n_leaves = (parent.size + 2) // 2
        self.root = parent.size - 1
        self.names = names

    def clade_members(self):
        """Returns: bool array (n_nodes, n_leaves), row v marks the leaves below v."""
        m, n = self.parent.size, self.n_leaves
        member = np.zeros((m, n), dtype=bool)
        member[np.arange(n), np.arange(n)] = True
        for v in range(m - 1):  # ascending ids = postorder
            member[self.parent[v]] |= member[v]
        return member

    def to_newick(self):
        """Returns: Newick text ending in ";\\n", lengths at full precision (repr).

        References: Newick format, the trade's de facto standard (1986 informal
        specification).
        """
        children = [[] for _ in range(self.parent.size)]
        for v in range(self.parent.size - 1):
            children[self.parent[v]].append(v)
        out = []
        # Stack items: a node to open, or a literal string to emit on the way back.
        stack = [self.root]
        while stack:
            item = stack.pop()
            if isinstance(item, str):
                out.append(item)
                continue
            v = item
            tail = "" if v == self.root else ":" + repr(float(self.length[v]))
            if v < self.n_leaves:
                # Quoted: in an unquoted Newick label '_' stands for a blank.
                out.append("'" + self.names[v] + "'" + tail)
                continue
            out.append("(")
            stack.append(")" + tail)
            kids = children[v]
            for k, child in enumerate(reversed(kids)):
                stack.append(child)
                if k < len(kids) - 1:
                    stack.append(",")
        return "".join(out) + ";\n"


def random_tree(n_leaves, rng, terminal_mean, internal_mean, floor):
    """Random topology by joining random pairs; exponential branch lengths.

    Parameters: n_leaves (>= 3); rng (numpy Generator); terminal_mean and
    internal_mean, the exponential means (substitutions per site); floor, added
    to every length so no two sequences come out identical.
    Returns: RandomTree (names unset), rooted at a basal trifurcation.
    """
    n = n_leaves
    parent = np.full(2 * n - 2, -1, dtype=np.int64)
    active = list(range(n))
    next_id = n
    while len(active) > 3:
        i, j = sorted(rng.choice(len(active), size=2, replace=False).tolist())
        parent[active[i]] = parent[active[j]] = next_id
        del active[j], active[i]
        active.append(next_id)
        next_id += 1
    parent[active] = next_id
    means = np.where(np.arange(2 * n - 2) < n, terminal_mean, internal_mean)
    length = floor + rng.exponential(1.0, size=2 * n - 2) * means
    length[next_id] = np.nan
    return RandomTree(parent, length)


def name_leaves(tree, rng, first_number=1, max_species_size=6):
    """Invented specimen names ``Genus_epithet_Island_NN``; one species per clade.

    Species are the largest clades with at most ``max_species_size`` leaves, so
    each species is monophyletic on the true tree.

    Parameters: tree, rng; first_number, the first specimen number (keeps the
    two data sets apart); max_species_size.  Returns: list of names by leaf id.
    """
    member = tree.clade_members()
    size = member.sum(axis=1)
    par = tree.parent
    top = [v for v in range(par.size - 1) if size[v] <= max_species_size
           and size[par[v]] > max_species_size]
    epithets = rng.permutation(EPITHETS).tolist()
    names = [""] * tree.n_leaves
    number = first_number
    for k, v in enumerate(top):
        epithet = epithets[k % len(epithets)]
        home = int(rng.integers(len(ISLANDS)))
        for leaf in np.flatnonzero(member[v]).tolist():
            # Most specimens come from the species' home island, a few from elsewhere.
            island = home if rng.random() < 0.75 else int(rng.integers(len(ISLANDS)))
            names[leaf] = f"{GENUS}_{epithet}_{ISLANDS[island]}_{number:02d}"
            number += 1
    return names


# ------------------------------------------------------------------ substitution
def gamma_category_rates(alpha, n_categories, rng, n_draws=200_000):
    """Equal-probability gamma rate categories, each rate the category mean.

    The category means are estimated from sorted gamma draws (numpy only, no
    quantile function needed) and rescaled to average exactly one.

    Parameters: alpha, gamma shape (mean 1, variance 1/alpha); n_categories; rng.
    Returns: float array (n_categories,), increasing, mean 1.
    References: Yang (1994) J. Mol. Evol. 39:306-314.
    """
    draws = np.sort(rng.gamma(alpha, 1.0 / alpha, size=n_draws))
    rates = np.array([chunk.mean() for chunk in np.array_split(draws, n_categories)])
    return rates / rates.mean()


def hky85_eigen(freqs, kappa):
    """Eigen-decomposition of the HKY85 rate matrix, scaled to one substitution.

    Q is time-reversible, so D^(1/2) Q D^(-1/2) (D = diag(freqs)) is symmetric
    and has a real orthogonal eigen-decomposition.

    Parameters: freqs (4,), ACGT frequencies; kappa, transition/transversion ratio.
    Returns: (values (4,), left, right) with P(t) = left @ diag(exp(values t)) @ right.
    References: Hasegawa, Kishino & Yano (1985) J. Mol. Evol. 22:160-174.
    """
    freqs = np.asarray(freqs, dtype=float)
    transition = np.zeros((4, 4), dtype=bool)
    transition[[0, 2, 1, 3], [2, 0, 3, 1]] = True  # A<->G, C<->T
    q = np.where(transition, kappa, 1.0) * freqs[None, :]
    np.fill_diagonal(q, 0.0)
    np.fill_diagonal(q, -q.sum(axis=1))
    q /= -(freqs * np.diag(q)).sum()  # branch lengths in expected substitutions/site
    root = np.sqrt(freqs)
    sym = root[:, None] * q / root[None, :]
    sym = (sym + sym.T) / 2.0  # remove rounding asymmetry before eigh
    values, vectors = np.linalg.eigh(sym)
    return values, vectors / root[:, None], vectors.T * root[None, :]


def hky85_p(eigen, times):
    """HKY85 transition probabilities P(t) = expm(Q t) for several t at once.

    Parameters: eigen, from ``hky85_eigen``; times (k,), length x category rate.
    Returns: array (k, 4, 4); row i of P[c] is the child's distribution given i.
    References: Hasegawa, Kishino & Yano (1985).
    """
    values, left, right = eigen
    expo = np.exp(np.asarray(times)[:, None] * values[None, :])
    p = np.einsum("ij,kj,jl->kil", left, expo, right)
    return np.clip(p, 0.0, None)


def equal_input_p(freqs, times):
    """Equal-input (F81-like) transition probabilities in closed form.

    P_ij(t) = exp(-mu t) [i == j] + (1 - exp(-mu t)) pi_j, with
    mu = 1 / (1 - sum pi^2) so that t is in expected substitutions per site.

    Parameters: freqs (s,), stationary frequencies; times (k,).
    Returns: array (k, s, s).  References: Felsenstein (1981) J. Mol. Evol. 17:368-376.
    """
    freqs = np.asarray(freqs, dtype=float)
    mu = 1.0 / (1.0 - np.sum(freqs ** 2))
    stay = np.exp(-mu * np.asarray(times))[:, None, None]
    return stay * np.eye(freqs.size)[None] + (1.0 - stay) * freqs[None, None, :]


def _evolve(tree, n_sites, rng, freqs, alpha, p_of_times, n_categories=4):
    """Draw states root to leaves, vectorised over sites; returns leaf states (n, sites)."""
    rates = gamma_category_rates(alpha, n_categories, rng)
    category = rng.integers(n_categories, size=n_sites)
    n_states = freqs.size
    states = np.empty((tree.parent.size, n_sites), dtype=np.int64)
    states[tree.root] = rng.choice(n_states, size=n_sites, p=freqs)
    for v in range(tree.root - 1, -1, -1):  # descending ids = preorder
        cumulative = np.cumsum(p_of_times(tree.length[v] * rates), axis=2)
        rows = cumulative[category, states[tree.parent[v]]]  # (n_sites, n_states)
        u = rng.random(n_sites)
        states[v] = np.minimum((u[:, None] >= rows).sum(axis=1), n_states - 1)
    return states[: tree.n_leaves]


def simulate_nucleotides(tree, n_sites, rng, freqs, kappa, alpha):
    """Simulate a DNA alignment under HKY85 with discrete gamma rates.

    Parameters: tree (RandomTree, substitutions per site); n_sites; rng; freqs
    (4,), ACGT frequencies, also at the root; kappa, transition/transversion rate
    ratio; alpha, gamma shape (four equal-probability categories).
    Returns: ``<U1`` array (n_leaves, n_sites) of A, C, G, T.
    References: Hasegawa, Kishino & Yano (1985); Yang (1994).
    """
    freqs = np.asarray(freqs, dtype=float)
    eigen = hky85_eigen(freqs, kappa)
    states = _evolve(tree, n_sites, rng, freqs, alpha, lambda t: hky85_p(eigen, t))
    return np.array(list(NUCLEOTIDES))[states]


def simulate_proteins(tree, n_sites, rng, freqs, alpha):
    """Simulate an amino-acid alignment under an equal-input 20-state model.

    Parameters: tree, n_sites, rng, alpha as in ``simulate_nucleotides``; freqs
    (20,) in ``AMINO_ACIDS`` order.  Returns: ``<U1`` array of one-letter codes.
    References: Felsenstein (1981); Yang (1994).
    """
    freqs = np.asarray(freqs, dtype=float)
    states = _evolve(tree, n_sites, rng, freqs, alpha, lambda t: equal_input_p(freqs, t))
    return np.array(list(AMINO_ACIDS))[states]


# ------------------------------------------------------------- missing data
def add_clade_indels(aln, tree, rng, n_events, min_len, max_len, step, max_clade):
    """Gap runs shared by all of a clade (one deletion on its stem), in place.

    Lengths are multiples of ``step`` (3 keeps a coding frame intact); clades of
    2..``max_clade`` leaves are eligible.
    """
    member = tree.clade_members()
    size = member.sum(axis=1)
    candidates = np.flatnonzero((size >= 2) & (size <= max_clade))
    for v in rng.choice(candidates, size=n_events, replace=False).tolist():
        run = step * int(rng.integers(min_len // step, max_len // step + 1))
        start = step * int(rng.integers(10 // step + 1, (aln.shape[1] - run - 10) // step))
        aln[np.ix_(member[v], np.arange(start, start + run))] = "-"


def add_ragged_ends(aln, rng, n_seqs, max_len):
    """Leading or trailing gaps in a few sequences, as left by primer trimming."""
    for row in rng.choice(aln.shape[0], size=n_seqs, replace=False).tolist():
        run = int(rng.integers(5, max_len + 1))
        if rng.random() < 0.5:
            aln[row, :run] = "-"
        else:
            aln[row, -run:] = "-"


def add_nucleotide_ambiguities(aln, rng, n_seqs):
    """Two-fold NC-IUB (1985) codes consistent with the true base, plus one N run."""
    rows = rng.choice(aln.shape[0], size=n_seqs, replace=False).tolist()
    for row in rows:
        sites = np.flatnonzero(aln[row] != "-")
        for site in rng.choice(sites, size=int(rng.integers(2, 6)), replace=False).tolist():
            codes = IUPAC_WITH_BASE[str(aln[row, site])]
            aln[row, site] = codes[int(rng.integers(len(codes)))]
    sites = np.flatnonzero(aln[rows[0]] != "-")
    start = int(rng.choice(sites[: sites.size - 8]))
    aln[rows[0], start:start + 6] = np.where(aln[rows[0], start:start + 6] == "-", "-", "N")


def add_unknown_residues(aln, rng, n_seqs):
    """A few 'X' (unknown amino acid) in some protein sequences."""
    for row in rng.choice(aln.shape[0], size=n_seqs, replace=False).tolist():
        sites = np.flatnonzero(aln[row] != "-")
        aln[row, rng.choice(sites, size=int(rng.integers(1, 4)), replace=False)] = "X"


# ------------------------------------------------------------------- writers
def format_fasta(names, aln, width=60):
    """FASTA text, records in the order given, sequence lines wrapped at ``width``."""
    lines = []
    for name, row in zip(names, aln):
        seq = "".join(row.tolist())
        lines.append(">" + name)
        lines.extend(seq[i:i + width] for i in range(0, len(seq), width))
    return "\n".join(lines) + "\n"


def format_nexus_dna(names, aln, comment):
    """NEXUS DATA block, non-interleaved (Maddison, Swofford & Maddison 1997)."""
    pad = max(len(n) for n in names) + 2
    lines = ["#NEXUS", "", f"[{comment}]", "", "BEGIN DATA;",
             f"  DIMENSIONS NTAX={aln.shape[0]} NCHAR={aln.shape[1]};",
             "  FORMAT DATATYPE=DNA MISSING=? GAP=-;", "  MATRIX"]
    lines += ["    " + name.ljust(pad) + "".join(row.tolist()) for name, row in zip(names, aln)]
    lines += ["  ;", "END;"]
    return "\n".join(lines) + "\n"


def _write(path, text):
    with open(path, "w", encoding="ascii", newline="\n") as handle:
        handle.write(text)


# ---------------------------------------------------------------------- main
def make_coi(rng):
    """The nucleotide data set: (tree, alignment rows in leaf-id order)."""
    tree = random_tree(30, rng, terminal_mean=0.035, internal_mean=0.025, floor=0.004)
    tree.names = name_leaves(tree, rng, first_number=1)
    aln = simulate_nucleotides(tree, 900, rng, COI_FREQS, kappa=4.0, alpha=0.5)
    add_clade_indels(aln, tree, rng, n_events=3, min_len=3, max_len=15, step=3, max_clade=8)
    add_ragged_ends(aln, rng, n_seqs=4, max_len=30)
    add_nucleotide_ambiguities(aln, rng, n_seqs=5)
    return tree, aln


def make_shell(rng):
    """The protein data set: (tree, alignment rows in leaf-id order)."""
    tree = random_tree(20, rng, terminal_mean=0.08, internal_mean=0.06, floor=0.01)
    tree.names = name_leaves(tree, rng, first_number=101)
    aln = simulate_proteins(tree, 300, rng, SHELL_FREQS, alpha=0.5)
    add_clade_indels(aln, tree, rng, n_events=2, min_len=2, max_len=8, step=1, max_clade=6)
    add_ragged_ends(aln, rng, n_seqs=2, max_len=12)
    add_unknown_residues(aln, rng, n_seqs=3)
    return tree, aln


def main(argv=None):
    """Write the five demo data files into ``--out`` (default: this script's folder).

    Parameters: argv, list of str or None (the command line).
    Returns: list of the paths written.
    """
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--out", default=os.path.dirname(os.path.abspath(__file__)),
                        help="folder to write into (default: the folder of this script)")
    args = parser.parse_args(argv)
    os.makedirs(args.out, exist_ok=True)
    rng = np.random.default_rng(SEED)
    comment = ("Simulated demo data: invented organisms and places. "
               f"Regenerate with: python example_alignments/make_examples.py (seed {SEED})")
    files = {}
    for stem, make in [("glass_snails_coi", make_coi), ("glass_snails_shell", make_shell)]:
        tree, aln = make(rng)
        order = sorted(range(tree.n_leaves), key=lambda i: tree.names[i])  # species together
        names = [tree.names[i] for i in order]
        files[stem + ".fasta"] = format_fasta(names, aln[order])
        if make is make_coi:
            files[stem + ".nex"] = format_nexus_dna(names, aln[order], comment)
        files[stem + ".true.nwk"] = tree.to_newick()
    written = []
    for fname, text in files.items():
        written.append(os.path.join(args.out, fname))
        _write(written[-1], text)
    return written


if __name__ == "__main__":
    main()
