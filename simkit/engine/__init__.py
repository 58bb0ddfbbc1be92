"""simkit.engine"""
