"""simkit.design"""
