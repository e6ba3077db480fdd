"""Evaluation code: region generators and checks used to measure the method from outside.

Nothing in the product imports this package; it exists so that acceptance tests and
benchmarks can score the pipeline on regions built by code that shares no truth-building
code with :mod:`aquitardmap.evaluation.synthetic`.
"""
