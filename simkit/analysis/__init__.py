"""simkit.analysis"""
