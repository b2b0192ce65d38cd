"""Report writers (text, JSON, SARIF, JUnit, Markdown, annotations, HTML) and figures."""
