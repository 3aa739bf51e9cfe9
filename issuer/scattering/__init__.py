"""scattering"""
