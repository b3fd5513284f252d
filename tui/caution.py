"""The one caution sentence lotwatch shows wherever a result could drive a decision: the review
and weekly report (text, Markdown, HTML), alert descriptions, the statistics battery, the command
line and the app's screens. A leaf module (no imports), so every layer may use it."""

CAUTION = (
    "A statistical signal is a reason to investigate, not a disposition of product: "
    "follow your site's quality procedures, local codes and qualified people."
)
