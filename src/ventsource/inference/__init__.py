"""Inference, in sub-layers; a module imports only from its own sub-layer or below
(tests/test_layers.py, SUBLAYERS):

1. priors/: prior files, their schema and distributions;
2. likelihood, option_rules: Measurement and the likelihood; options of infer;
3. evidence/: bridge sampling and its proposal;
4. engines/: tempered SMC, emcee and their moves, R-hat of SMC runs;
5. hypotheses/: M0/M1/M2, the SO2 factor integrated out, model choice;
6. row/: one measurement (infer and its result);
7. window/: rows that share one magma source (infer_window).

May import: common, chemistry, magma, ascent, forward.
"""
