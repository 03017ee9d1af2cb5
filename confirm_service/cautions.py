"""The cautions shown wherever a decision is displayed or recorded: the one source of their text.

README.md quotes :data:`CANDIDATE_IS_NOT_A_DETECTION` word for word (``tests/test_cautions.py``
keeps the two equal); every other place imports it from here.
"""

NOT_A_DETECTION = (
    "A candidate that passes every check of a protocol is still not a detection of "
    "extraterrestrial technology: it is a signal that has not yet been explained."
)
PUBLIC_STATEMENTS = (
    "Any public statement, and any reply, follows the institution's own policy and the "
    "internationally agreed post-detection principles, after independent verification."
)
SITE_SAFETY = (
    "Telescope safety rules, such as Sun avoidance, belong to each site and override any "
    "follow-up request."
)
CANDIDATE_IS_NOT_A_DETECTION = f"{NOT_A_DETECTION} {PUBLIC_STATEMENTS} {SITE_SAFETY}"

FOLLOWUP_EMBARGO = (
    "Confidential: an unverified candidate under embargo. Share this request only with the "
    "people who handle it at your site, and make no statement about it."
)
