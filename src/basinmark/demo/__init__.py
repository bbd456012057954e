"""The demo: an invented model surface (an ASE calculator) and the generator of the sample sets.

* :mod:`basinmark.demo.surface` — the ringfork pseudo-molecule's energy and forces;
* :mod:`basinmark.demo.sampling` — saddle search, normal modes, quasiclassical initial conditions;
* :mod:`basinmark.demo.integrate` — velocity Verlet over many runs at once;
* :mod:`basinmark.demo.generate` — ``generate(out_dir, runs, seed, ...)`` writes a set;
* :mod:`basinmark.demo.phase_set` — starting conditions of a set whose outcome one mode's phase decides;
* :mod:`basinmark.demo.scenario` — the set's rules file and README text.
"""
