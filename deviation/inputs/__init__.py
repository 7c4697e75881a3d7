"""What comes in: the case file (TOML), the retort and cold-spot logs (CSV), the cycle read from them.

Every value that enters the tool is checked here, once, with a message that names the file, the
row and the field; Fahrenheit becomes Celsius here and nowhere else.
"""
