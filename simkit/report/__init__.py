"""simkit.report"""
