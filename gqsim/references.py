"""Registry of the published sources that gqsim's formulas come from.

Docstrings cite a formula as ``Eq. (n) of [key]``; every ``key`` resolves here.
Entries flagged ``from_memory=True`` give equation numbers recalled rather than
checked against the text; treat those numbers as unconfirmed.
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["Reference", "REFERENCES", "cite"]


@dataclass(frozen=True, kw_only=True)
class Reference:
    """One bibliographic entry."""

    key: str
    authors: str
    title: str
    journal: str
    year: int
    identifier: str
    from_memory: bool = False

    def __str__(self) -> str:
        flag = " (details from memory)" if self.from_memory else ""
        return f"{self.authors}, {self.title}, {self.journal} ({self.year}), {self.identifier}{flag}"


_ENTRIES = [
    Reference(key="Bose2017", authors="S. Bose et al.",
              title="Spin Entanglement Witness for Quantum Gravity",
              journal="Phys. Rev. Lett. 119, 240401", year=2017, identifier="arXiv:1707.06050"),
    Reference(key="Marletto2017", authors="C. Marletto, V. Vedral",
              title="Gravitationally induced entanglement between two massive particles is "
                    "sufficient evidence of quantum effects in gravity",
              journal="Phys. Rev. Lett. 119, 240402", year=2017, identifier="arXiv:1707.06036",
              from_memory=True),
    Reference(key="Wootters1998", authors="W. K. Wootters",
              title="Entanglement of Formation of an Arbitrary State of Two Qubits",
              journal="Phys. Rev. Lett. 80, 2245", year=1998, identifier="doi:10.1103/PhysRevLett.80.2245"),
    Reference(key="VidalWerner2002", authors="G. Vidal, R. F. Werner",
              title="Computable measure of entanglement",
              journal="Phys. Rev. A 65, 032314", year=2002, identifier="arXiv:quant-ph/0102117"),
    Reference(key="Peres1996", authors="A. Peres", title="Separability Criterion for Density Matrices",
              journal="Phys. Rev. Lett. 77, 1413", year=1996, identifier="arXiv:quant-ph/9604005"),
    Reference(key="Horodecki1996", authors="M. Horodecki, P. Horodecki, R. Horodecki",
              title="Separability of mixed states: necessary and sufficient conditions",
              journal="Phys. Lett. A 223, 1", year=1996, identifier="arXiv:quant-ph/9605038"),
    Reference(key="Werner1989", authors="R. F. Werner",
              title="Quantum states with Einstein-Podolsky-Rosen correlations admitting a "
                    "hidden-variable model", journal="Phys. Rev. A 40, 4277", year=1989,
              identifier="doi:10.1103/PhysRevA.40.4277"),
    Reference(key="Lindblad1976", authors="G. Lindblad",
              title="On the generators of quantum dynamical semigroups",
              journal="Commun. Math. Phys. 48, 119", year=1976, identifier="doi:10.1007/BF01608499"),
    Reference(key="GKS1976", authors="V. Gorini, A. Kossakowski, E. C. G. Sudarshan",
              title="Completely positive dynamical semigroups of N-level systems",
              journal="J. Math. Phys. 17, 821", year=1976, identifier="doi:10.1063/1.522979"),
    Reference(key="BreuerPetruccione2002", authors="H.-P. Breuer, F. Petruccione",
              title="The Theory of Open Quantum Systems", journal="Oxford University Press",
              year=2002, identifier="ISBN 978-0-19-852063-4", from_memory=True),
    Reference(key="NielsenChuang2010", authors="M. A. Nielsen, I. L. Chuang",
              title="Quantum Computation and Quantum Information (10th anniversary ed.)",
              journal="Cambridge University Press", year=2010, identifier="ISBN 978-1-107-00217-3",
              from_memory=True),
    Reference(key="Tilly2021", authors="J. Tilly, R. J. Marshman, A. Mazumdar, S. Bose",
              title="Qudits for witnessing quantum-gravity-induced entanglement of masses under "
                    "decoherence", journal="Phys. Rev. A 104, 052416", year=2021,
              identifier="arXiv:2101.08086", from_memory=True),
    Reference(key="Schut2022", authors="M. Schut, J. Tilly, R. J. Marshman, S. Bose, A. Mazumdar",
              title="Improving resilience of quantum-gravity-induced entanglement of masses to "
                    "decoherence using three superpositions", journal="Phys. Rev. A 105, 032411",
              year=2022, identifier="arXiv:2110.14695", from_memory=True),
    Reference(key="NguyenBernards2020", authors="H. C. Nguyen, F. Bernards",
              title="Entanglement dynamics of two mesoscopic objects with gravitational "
                    "interaction", journal="Eur. Phys. J. D 74, 105", year=2020,
              identifier="arXiv:1906.11184", from_memory=True),
    Reference(key="Chevalier2020", authors="H. Chevalier, A. J. Paige, M. S. Kim",
              title="Witnessing the nonclassical nature of gravity in the presence of unknown "
                    "interactions", journal="Phys. Rev. A 102, 022428", year=2020,
              identifier="arXiv:2005.13922", from_memory=True),
    Reference(key="Newton1687", authors="I. Newton",
              title="Philosophiae Naturalis Principia Mathematica (shell theorem, Book I Prop. 71)",
              journal="Royal Society", year=1687, identifier="textbook", from_memory=True),
    Reference(key="Krisnanda2020", authors="T. Krisnanda, G. Y. Tham, M. Paternostro, T. Paterek",
              title="Observable quantum entanglement due to gravity",
              journal="npj Quantum Information 6, 12", year=2020, identifier="arXiv:1906.08808",
              from_memory=True),
    Reference(key="Simon2000", authors="R. Simon",
              title="Peres-Horodecki Separability Criterion for Continuous Variable Systems",
              journal="Phys. Rev. Lett. 84, 2726", year=2000, identifier="arXiv:quant-ph/9909044"),
    Reference(key="Duan2000", authors="L.-M. Duan, G. Giedke, J. I. Cirac, P. Zoller",
              title="Inseparability Criterion for Continuous Variable Systems",
              journal="Phys. Rev. Lett. 84, 2722", year=2000, identifier="arXiv:quant-ph/9908056"),
    Reference(key="Serafini2017", authors="A. Serafini",
              title="Quantum Continuous Variables: A Primer of Theoretical Methods",
              journal="CRC Press", year=2017, identifier="ISBN 978-1-4822-4634-6", from_memory=True),
    Reference(key="AdessoIlluminati2007", authors="G. Adesso, F. Illuminati",
              title="Entanglement in continuous-variable systems: recent advances and current "
                    "perspectives", journal="J. Phys. A 40, 7821", year=2007,
              identifier="arXiv:quant-ph/0701221", from_memory=True),
    Reference(key="VanLoan1978", authors="C. F. Van Loan",
              title="Computing integrals involving the matrix exponential",
              journal="IEEE Trans. Autom. Control 23, 395", year=1978,
              identifier="doi:10.1109/TAC.1978.1101743"),
    Reference(key="Genoni2016", authors="M. G. Genoni, L. Lami, A. Serafini",
              title="Conditional and unconditional Gaussian quantum dynamics",
              journal="Contemp. Phys. 57, 331", year=2016, identifier="arXiv:1607.02619",
              from_memory=True),
    Reference(key="Goldstein2002", authors="H. Goldstein, C. Poole, J. Safko",
              title="Classical Mechanics (3rd ed.), ch. 6: oscillations", journal="Addison-Wesley",
              year=2002, identifier="ISBN 978-0-201-65702-9", from_memory=True),
    Reference(key="Weedbrook2012", authors="C. Weedbrook et al.", title="Gaussian quantum information",
              journal="Rev. Mod. Phys. 84, 621", year=2012, identifier="arXiv:1110.3234",
              from_memory=True),
    Reference(key="RomeroIsart2011", authors="O. Romero-Isart",
              title="Quantum superposition of massive objects and collapse models",
              journal="Phys. Rev. A 84, 052121", year=2011, identifier="arXiv:1110.4495",
              from_memory=True),
    Reference(key="JoosZeh1985", authors="E. Joos, H. D. Zeh",
              title="The emergence of classical properties through interaction with the "
                    "environment", journal="Z. Phys. B 59, 223", year=1985,
              identifier="doi:10.1007/BF01725541", from_memory=True),
    Reference(key="Schlosshauer2007", authors="M. Schlosshauer",
              title="Decoherence and the Quantum-to-Classical Transition", journal="Springer",
              year=2007, identifier="ISBN 978-3-540-35773-5", from_memory=True),
    Reference(key="CaldeiraLeggett1983", authors="A. O. Caldeira, A. J. Leggett",
              title="Path integral approach to quantum Brownian motion",
              journal="Physica A 121, 587", year=1983, identifier="doi:10.1016/0378-4371(83)90013-4",
              from_memory=True),
    Reference(key="CasimirPolder1948", authors="H. B. G. Casimir, D. Polder",
              title="The Influence of Retardation on the London-van der Waals Forces",
              journal="Phys. Rev. 73, 360", year=1948, identifier="doi:10.1103/PhysRev.73.360"),
    Reference(key="Bertlmann2008", authors="R. A. Bertlmann, P. Krammer", title="Bloch vectors for qudits",
              journal="J. Phys. A 41, 235303", year=2008, identifier="arXiv:0806.1174", from_memory=True),
    Reference(key="Anderson2003", authors="T. W. Anderson",
              title="An Introduction to Multivariate Statistical Analysis (3rd ed.)", journal="Wiley",
              year=2003, identifier="ISBN 978-0-471-36091-9", from_memory=True),
    Reference(key="Cochran1934", authors="W. G. Cochran",
              title="The distribution of quadratic forms in a normal system, with applications to the "
                    "analysis of covariance", journal="Math. Proc. Cambridge Philos. Soc. 30, 178", year=1934,
              identifier="doi:10.1017/S0305004100016595", from_memory=True),
    Reference(key="Lifshitz1956", authors="E. M. Lifshitz",
              title="The theory of molecular attractive forces between solids",
              journal="Sov. Phys. JETP 2, 73", year=1956, identifier="textbook citation", from_memory=True),
    Reference(key="London1937", authors="F. London", title="The general theory of molecular forces",
              journal="Trans. Faraday Soc. 33, 8", year=1937, identifier="doi:10.1039/TF937330008B",
              from_memory=True),
    Reference(key="Guhne2009", authors="O. Gühne, G. Tóth", title="Entanglement detection",
              journal="Phys. Rep. 474, 1", year=2009, identifier="arXiv:0811.2803"),
    Reference(key="Jackson1999", authors="J. D. Jackson", title="Classical Electrodynamics (3rd ed.)",
              journal="Wiley", year=1999, identifier="ISBN 978-0-471-30932-1", from_memory=True),
    Reference(key="Epstein1924", authors="P. S. Epstein",
              title="On the resistance experienced by spheres in their motion through gases",
              journal="Phys. Rev. 23, 710", year=1924, identifier="doi:10.1103/PhysRev.23.710",
              from_memory=True),
    Reference(key="GallisFleming1990", authors="M. R. Gallis, G. N. Fleming",
              title="Environmental and spontaneous localization", journal="Phys. Rev. A 42, 38",
              year=1990, identifier="doi:10.1103/PhysRevA.42.38", from_memory=True),
    Reference(key="BohrenHuffman1983", authors="C. F. Bohren, D. R. Huffman",
              title="Absorption and Scattering of Light by Small Particles", journal="Wiley",
              year=1983, identifier="ISBN 978-0-471-29340-8", from_memory=True),
    Reference(key="RomeroIsart2011Levitation",
              authors="O. Romero-Isart, A. C. Pflanzer, M. L. Juan, R. Quidant, N. Kiesel, "
                      "M. Aspelmeyer, J. I. Cirac",
              title="Optically levitating dielectrics in the quantum regime: theory and protocols",
              journal="Phys. Rev. A 83, 013803", year=2011, identifier="arXiv:1010.3109",
              from_memory=True),
    Reference(key="Jain2016", authors="V. Jain, J. Gieseler, C. Moritz, C. Dellago, R. Quidant, L. Novotny",
              title="Direct Measurement of Photon Recoil from a Levitated Nanoparticle",
              journal="Phys. Rev. Lett. 116, 243601", year=2016, identifier="arXiv:1603.03420",
              from_memory=True),
    Reference(key="Reif1965", authors="F. Reif",
              title="Fundamentals of Statistical and Thermal Physics", journal="McGraw-Hill",
              year=1965, identifier="ISBN 978-0-07-051800-1", from_memory=True),
    Reference(key="CODATA2018", authors="E. Tiesinga et al.",
              title="CODATA recommended values of the fundamental physical constants: 2018",
              journal="Rev. Mod. Phys. 93, 025010", year=2021, identifier="doi:10.1103/RevModPhys.93.025010"),
    Reference(key="MolerVanLoan2003", authors="C. Moler, C. Van Loan",
              title="Nineteen Dubious Ways to Compute the Exponential of a Matrix, Twenty-Five Years Later",
              journal="SIAM Rev. 45, 3", year=2003, identifier="doi:10.1137/S00361445024180",
              from_memory=True),
    Reference(key="Brent1973", authors="R. P. Brent",
              title="Algorithms for Minimization without Derivatives (Ch. 4: root finding)",
              journal="Prentice-Hall, Englewood Cliffs NJ", year=1973, identifier="ISBN 0-13-022335-2",
              from_memory=True),
]

REFERENCES: dict[str, Reference] = {entry.key: entry for entry in _ENTRIES}


def cite(key: str) -> Reference:
    """Return the registry entry for ``key``; raise ``KeyError`` naming the unknown key."""
    try:
        return REFERENCES[key]
    except KeyError:
        raise KeyError(f"unknown reference key {key!r}; known: {sorted(REFERENCES)}") from None
