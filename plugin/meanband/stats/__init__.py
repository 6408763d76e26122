"""The statistics core: arrays in, frozen dataclasses out; never imports pytest."""
