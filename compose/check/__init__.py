"""compose.check"""
