"""The spacetime library: entries, their relations, versions and physics hashes, the cache, bulk builds.

``entries`` loads and lists a library folder and checks it as a whole,
``relations`` proves the declared ``limit_of`` / ``same_as`` relations,
``versions`` keeps the physics hash and the version record, ``diff`` compares two
versions of an entry, ``cache`` keeps derived results and figures on disk, and
``build`` builds every entry's reports with index pages.  The shipped spacetime
files themselves are data, in ``metrics_yaml/``.
"""
