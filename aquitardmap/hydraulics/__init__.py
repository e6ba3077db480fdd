"""Hydraulics of the clay column: conductivity, leakance, travel times, heads, piercing."""
