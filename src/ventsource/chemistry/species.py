"""Gas species, their element make-up and molar masses.

The species order here is the column order of every species array in the
package.
"""
import numpy as np

SPECIES = ("H2O", "H2", "O2", "CO2", "CO", "CH4", "SO2", "H2S", "S2", "COS")
INDEX = {name: i for i, name in enumerate(SPECIES)}
N_SPECIES = len(SPECIES)

ELEMENTS = ("H", "C", "O", "S")

# rows: species in SPECIES order; columns: H, C, O, S atoms per molecule
ELEMENT_MATRIX = np.array([
    [2, 0, 1, 0],  # H2O
    [2, 0, 0, 0],  # H2
    [0, 0, 2, 0],  # O2
    [0, 1, 2, 0],  # CO2
    [0, 1, 1, 0],  # CO
    [4, 1, 0, 0],  # CH4
    [0, 0, 2, 1],  # SO2
    [2, 0, 0, 1],  # H2S
    [0, 0, 0, 2],  # S2
    [0, 1, 1, 1],  # COS
], dtype=float)

# IUPAC 2013 standard atomic weights (abridged), g/mol
ATOMIC_MASS_G_MOL = {"H": 1.008, "C": 12.011, "O": 15.999, "S": 32.06}
MOLAR_MASS_G_MOL = ELEMENT_MATRIX @ np.array([ATOMIC_MASS_G_MOL[e] for e in ELEMENTS])

H_ATOMS = ELEMENT_MATRIX[:, 0].copy()
C_ATOMS = ELEMENT_MATRIX[:, 1].copy()
O_ATOMS = ELEMENT_MATRIX[:, 2].copy()
S_ATOMS = ELEMENT_MATRIX[:, 3].copy()
