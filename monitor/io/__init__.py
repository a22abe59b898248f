"""monitor.io: files without a database.

Readers map a user's headers onto canonical names through ONE table (``monitor.io.headers``) and
return canonical DataFrames or raise ``InputError`` with every problem.  Writers produce tidy CSV and
Darwin Core Archives.  Nothing here touches the database.
"""
