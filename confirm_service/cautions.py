"""The cautions shown wherever a decision is displayed or recorded."""

CANDIDATE_IS_NOT_A_DETECTION = (
    "A candidate that passes every check of a protocol is still not a detection of "
    "extraterrestrial technology: it is a signal that has not yet been explained. Any public "
    "statement, and any reply, follows the institution's own policy and the internationally "
    "agreed post-detection principles, after independent verification. Telescope safety rules, "
    "such as Sun avoidance, belong to each site and override any follow-up request."
)
