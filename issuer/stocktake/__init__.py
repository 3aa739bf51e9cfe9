"""stocktake"""
