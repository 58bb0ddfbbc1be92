"""simkit.parts"""
