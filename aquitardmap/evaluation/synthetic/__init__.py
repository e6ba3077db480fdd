"""Synthetic regions built from a known truth: the demo region, test regions, benchmarks.

Modules: :mod:`.truth` (the surfaces and the characters), :mod:`.boreholes` (drilling the
truth: positions, logs, samples), :mod:`.region` (writing the project folder); the stack is
:mod:`aquitardmap.evaluation.demo_stack`.

A synthetic region is a complete project folder (collars, intervals, samples, DEM, study-area
boundary, optionally ``project.toml``) generated from a *truth*: continuous surfaces of the
ground and of every unit's thickness. The truth is written beside the data (``truth/``) on
the screening grid of the project, so a run of the pipeline can be scored against it.

The truth is a deterministic function of position, built from seeded smooth random fields
(Gaussian-filtered white noise) and a few geological features that depend on the region's
*character*:

``"esker_window"``
    a sinuous buried sand-gravel ridge (esker) rises through the clay from below and opens a
    window along part of its crest; an old eroded channel, later filled with sand, leaves
    only a few metres of clay; the clay thins toward the valley margins.
``"channel_cut"``
    a meandering river channel cuts through the clay along much of its course; the clay is
    thick elsewhere, also near the margins.
``"bedrock_highs"``
    knobs of till or bedrock rise through the clay here and there, some far enough to open
    patchy windows.
``"ridge_and_channel"``
    a broad plain (the study area is nearly the whole rectangle; meant for about
    12 x 10 km) with 20-40 m of clay, crossed by a buried sand-gravel ridge and an infilled
    channel: each a gently curving strip 300-450 m wide and 5-10 km long, of random
    orientation, the two crossing at 30-90 degrees. Along most of each strip the clay is
    absent, with thin shoulders on both sides; about 4-5 % of the area has under 5 m of
    clay.

Borehole logs are then drawn from the truth the way such data arrive: many noisy water
wells, accurate geotechnical holes that stop inside the clay (censored), and a few cored
holes with grain-size, porosity and lab-conductivity samples. Two hole layouts:
``"clustered"`` (water wells in and around a town and a village, geotechnical holes by the
town and along a road, a few water wells planted in windows) and ``"even"`` (every hole
uniform at random over the study area with a minimum spacing, kinds assigned at random among
the positions, no planted window wells). The stack is the demo stack
(``SAND`` cover; ``UMC``, ``LMC``, ``LAM`` aquitards; ``GRAV`` aquifer).

Every random draw comes from one ``numpy.random.default_rng(seed)``, in a fixed order, so a
seed reproduces the CSV files byte for byte.

Example::

    >>> from aquitardmap.evaluation.synthetic.region import make_synthetic_region
    >>> region = make_synthetic_region("/tmp/ostrel", seed=7, n_holes=80,
    ...                                write_project_toml=True)   # doctest: +SKIP
    >>> region.counts["geotechnical"]                              # doctest: +SKIP
    24
"""
