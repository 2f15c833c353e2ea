"""compose.output"""
