"""The forward model: degassing conditions in, gas ratios out.

One object configured from a prior file. Parameter arrays are (n, k) in the
order of `parameter_names`; ratios come back as (n, m) with NaN rows where
the magma releases no gas at P or the solver failed (see `status`).
"""
import numpy as np

from ventsource.magma import degassing, iron_redox, sulfur_laws
from ventsource.ascent import observables
from ventsource.common.errors import InputError
from ventsource.ascent.scrubbing import scrub
from ventsource.ascent.quench import quench
from ventsource.ascent.plume_oxidation import oxidise_h2
from ventsource.magma.melt import validate_melt
from ventsource.magma.solubility_registry import prepare_co2, prepare_h2o
from ventsource.magma.solubility_h2o import LAW_POWER, prepare_power
from ventsource.chemistry.species import SPECIES

STATUS_OK = degassing.STATUS_GAS
STATUS_NO_GAS = degassing.STATUS_NO_GAS
STATUS_FAILED = degassing.STATUS_FAILED
# sulfur = "partition": D_S x S >= 1 would make the first gas more than all sulfur;
# such draws get zero prior mass (no gas, NaN ratios) and are counted by prior-predictive
STATUS_EXCLUDED = 3

DEFAULTS = {"scrubbed_h2s": 0.0, "h2s_return": 1.0, "exsolved_gas_wt": 0.0,
            "s_partition": float("nan"), "quench_temperature_c": float("nan"),
            "quench_pressure_bar": 1.0, "h2_retained_log10": 0.0}
UNITS = {"pressure_bar": "bar", "temperature_c": "degC", "dfmq": "log10 units relative to FMQ",
         "scrubbed_so2": "fraction", "h2o_wt": "wt%", "co2_ppm": "ppm by weight",
         "s_ppm": "ppm by weight", "s_partition": "mass fraction ratio gas/melt",
         "scrubbed_h2s": "fraction", "h2s_return": "fraction", "exsolved_gas_wt": "wt%",
         "quench_temperature_c": "degC", "quench_pressure_bar": "bar",
         "h2_retained_log10": "log10 of the fraction of H2 not burnt by air"}


class ForwardModel:
    def __init__(self, spec, ratio_names=observables.DEFAULT_RATIOS, open_steps=20):
        self.spec = spec
        self.parameter_names = tuple(spec.parameter_names)
        self.ratio_names = tuple(ratio_names)
        self._weights = observables.weight_matrices(self.ratio_names)  # validates the names
        models = spec.models
        melt = spec.melt_oxides_wt
        if models["h2o_solubility"] == "power_law":
            self.h2o_law = (LAW_POWER, prepare_power(melt, models["h2o_power_coefficient"],
                                                     models["h2o_power_exponent"]))
        else:
            self.h2o_law = prepare_h2o(models["h2o_solubility"], melt)
        self.co2_law = prepare_co2(models["co2_solubility"], melt)
        self.sulfide_capacity = None
        self.sulfur_caps = None
        if models["sulfur"] == "capacity":
            # sulfur by chemistry: composition sulfide capacity, Jugo et al. (2010)
            # sulfate split, capped by SCSS and SCAS (magma/sulfur_laws.py)
            self.sulfide_capacity = sulfur_laws.sulfide_capacity_oneill2021(melt)
            self.sulfur_caps = sulfur_laws.prepare_sulfur_caps(melt)
        elif models["sulfur"] == "sulfide_capacity":
            self.sulfide_capacity = (models["sulfide_capacity_ln_a"], models["sulfide_capacity_b_k"])
        elif models["sulfur"] != "partition":
            raise InputError(f"unknown sulfur model '{models['sulfur']}'")
        # evolving redox: dfmq is the magma's before degassing, fO2 then follows the
        # electron balance of melt Fe, melt S and gas (magma/redox_balance.py)
        self.redox = None
        if models.get("redox", "buffered") == "evolving":
            self.redox = (iron_redox.kc91_composition_term(melt), validate_melt(melt)["FeOt"])
        self.style = models["degassing"]
        self.product = models["scrubbing_product"]
        self.eos = models["eos"]
        self.quench = models.get("quench", "none")
        self.open_steps = open_steps
        self._index = {name: i for i, name in enumerate(self.parameter_names)}

    def _column(self, theta, name):
        if name in self._index:
            return theta[:, self._index[name]]
        return np.full(theta.shape[0], DEFAULTS[name])

    def _as_theta(self, theta_full):
        theta = np.atleast_2d(np.asarray(theta_full, dtype=float))
        if theta.shape[1] != len(self.parameter_names):
            raise ValueError(f"parameter array has {theta.shape[1]} columns; expected "
                             f"{len(self.parameter_names)} ({', '.join(self.parameter_names)})")
        return theta

    def state(self, theta_full, saturation=True):
        """Full view for reports: dict of arrays (gas before and after scrubbing, melt, ...)."""
        theta = self._as_theta(theta_full)
        col = lambda name: self._column(theta, name)  # noqa: E731
        h2o, co2, s = col("h2o_wt"), col("co2_ppm"), col("s_ppm")
        extra = col("exsolved_gas_wt")
        if np.any(extra > 0.0):
            h2o, co2, s = self._add_exsolved_gas(theta, extra, h2o.copy(), co2.copy(), s.copy())
        res = degassing.degas(col("temperature_c"), col("pressure_bar"), col("dfmq"), h2o,
                              co2, s, col("s_partition"), self.h2o_law,
                              self.co2_law, style=self.style, eos=self.eos,
                              saturation=saturation, open_steps=self.open_steps,
                              sulfide_capacity=self.sulfide_capacity,
                              sulfur_caps=self.sulfur_caps, redox=self.redox)
        res.status = self._exclude_impossible_partition(res, col("s_partition"), s)
        vent_gas, status = self._quench(theta, res)
        if "h2_retained_log10" in self._index:  # H2 burnt by air in the plume
            vent_gas = oxidise_h2(vent_gas, col("h2_retained_log10"))
        gas = scrub(vent_gas, col("scrubbed_so2"), self.product, col("scrubbed_h2s"),
                    col("h2s_return"))
        return {
            "status": status,
            "deep_gas": res.gas,        # at the degassing pressure and temperature
            "magmatic_gas": vent_gas,   # at the vent, after the quench, before scrubbing
            "gas": gas,
            "gas_wt_fraction": res.gas_wt_fraction,
            "melt_h2o_wt": res.melt_h2o_wt,
            "melt_co2_ppm": res.melt_co2_ppm,
            "melt_s_ppm": res.melt_s_ppm,
            "saturation_pressure_bar": res.saturation_pressure_bar,
            # open style only: gas-saturated at the search cap, the path started there
            "closed_above_cap": res.closed_above_cap,
            # 0 none, 1 sulfide liquid, 2 anhydrite holds the S above the melt's cap
            "sulfur_phase": res.sulfur_phase,
            "dfmq_at_pressure": res.dfmq_at_pressure,
            "ratios": observables.ratios(gas, self.ratio_names, self._weights),
        }

    def _quench(self, theta, res):
        """(gas at the vent before scrubbing, status): the degassed gas re-equilibrated
        at the quench state (ascent/quench.py). The gas cannot be hotter, nor at a
        higher pressure, than where it left the magma, so the quench state is capped
        there. A row whose quench fails gets STATUS_FAILED."""
        if self.quench == "none":
            return res.gas, res.status
        rows = np.flatnonzero(res.status == STATUS_OK)
        col = lambda name: self._column(theta, name)[rows]  # noqa: E731
        t_q = np.minimum(col("quench_temperature_c"), col("temperature_c"))
        p_q = np.minimum(col("quench_pressure_bar"), col("pressure_bar"))
        x, ok = quench(res.gas[rows], self.quench, t_q, p_q, col("dfmq"), eos=self.eos)
        gas = np.array(res.gas, copy=True)
        gas[rows] = x
        status = np.array(res.status, copy=True)
        status[rows[~ok]] = STATUS_FAILED
        return gas, status

    def _exclude_impossible_partition(self, res, d_s, s_ppm):
        """Status with STATUS_EXCLUDED (and NaN gas) where D_S x S >= 1 (partition only)."""
        if self.sulfide_capacity is not None:
            return res.status
        bad = d_s * s_ppm * 1e-6 >= 1.0
        if not np.any(bad):
            return res.status
        res.gas[bad] = np.nan
        status = res.status.copy()
        status[bad] = STATUS_EXCLUDED
        return status

    def _add_exsolved_gas(self, theta, extra_wt, h2o, co2, s):
        """Add gas exsolved at depth to the bulk volatiles.

        The extra gas (exsolved_gas_wt, wt% of the magma) is taken as the first
        gas the magma makes, the gas in equilibrium with it just below its
        saturation pressure: CO2-rich gas accumulated from deeper levels.
        A magma still gas-saturated at the search cap gets no addition: it
        has no saturation pressure to take the first gas at (its open path
        starts at the cap, flagged closed_above_cap).
        """
        rows = np.flatnonzero(extra_wt > 0.0)
        col = lambda name: self._column(theta, name)[rows]  # noqa: E731
        first = degassing.degas(col("temperature_c"), col("pressure_bar"), col("dfmq"), h2o[rows],
                                co2[rows], s[rows], col("s_partition"), self.h2o_law, self.co2_law,
                                style="closed", eos=self.eos, saturation=True,
                                sulfide_capacity=self.sulfide_capacity,
                              sulfur_caps=self.sulfur_caps, redox=self.redox)
        p_sat = first.saturation_pressure_bar
        ok = np.isfinite(p_sat)
        if not np.any(ok):
            return h2o, co2, s
        r = rows[ok]
        deep = degassing.degas(col("temperature_c")[ok], p_sat[ok] * (1.0 - 1e-6),
                               col("dfmq")[ok], h2o[r], co2[r], s[r], col("s_partition")[ok],
                               self.h2o_law, self.co2_law, style="closed", eos=self.eos,
                               saturation=False, sulfide_capacity=self.sulfide_capacity,
                              sulfur_caps=self.sulfur_caps, redox=self.redox)
        gas = deep.gas
        good = deep.status == degassing.STATUS_GAS
        from ventsource.chemistry.species import ELEMENT_MATRIX, MOLAR_MASS_G_MOL
        mbar = gas @ MOLAR_MASS_G_MOL
        per_gram = (gas @ ELEMENT_MATRIX) / mbar[:, None]  # mol H, C, O, S per g of gas
        grams = extra_wt[r] / 100.0
        add_h2o = np.where(good, 100.0 * grams * per_gram[:, 0] / 2.0 * degassing.M_H2O, 0.0)
        add_co2 = np.where(good, 1e6 * grams * per_gram[:, 1] * degassing.M_CO2, 0.0)
        add_s = np.where(good, 1e6 * grams * per_gram[:, 3] * degassing.M_S, 0.0)
        h2o[r] += add_h2o
        co2[r] += add_co2
        s[r] += add_s
        return h2o, co2, s

    def ratios(self, theta_full):
        return self.state(theta_full, saturation=self.style == "open")["ratios"]

    def status(self, theta_full):
        return self.state(theta_full, saturation=self.style == "open")["status"]

    def ratios_and_status(self, theta_full):
        s = self.state(theta_full, saturation=self.style == "open")
        return s["ratios"], s["status"]


__all__ = ["ForwardModel", "SPECIES", "UNITS"]
