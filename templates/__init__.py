"""The report's Jinja2 templates and CSS, shipped as data of the package ``reporter.templates``.

The file makes the folder an ordinary package so that the templates are found the same way in
an installed wheel and in an editable install; it holds no code.
"""
