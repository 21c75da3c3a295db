"""The agreement check must be able to fail: a perturbed value, a missing value and an empty
comparison are each reported. Run: python -m unittest discover -s bench -p 'test_*.py'"""

import math
import unittest

from compare import compare, relative_difference


class AgreementCheckCanFail(unittest.TestCase):
    def setUp(self):
        # Arbitrary values: the check compares two copies, so no outside source is needed.
        self.reference = {
            ("abc123", "hc1", "visits"): (0.0301234, 0.0024),
            ("abc123", "cluster:village", "visits"): (0.0301234, 0.0031),
        }

    def test_identical_values_agree(self):
        worst, compared, problems = compare(self.reference, dict(self.reference))
        self.assertEqual(problems, [])
        self.assertEqual(compared, 4)
        self.assertEqual(worst, 0.0)

    def test_difference_below_tolerance_agrees(self):
        ours = dict(self.reference)
        est, se = ours[("abc123", "hc1", "visits")]
        ours[("abc123", "hc1", "visits")] = (est * (1 + 1e-10), se)
        worst, _, problems = compare(self.reference, ours)
        self.assertEqual(problems, [])
        self.assertGreater(worst, 0.0)

    def test_perturbed_standard_error_fails(self):
        ours = dict(self.reference)
        est, se = ours[("abc123", "cluster:village", "visits")]
        ours[("abc123", "cluster:village", "visits")] = (est, se * (1 + 1e-7))
        worst, _, problems = compare(self.reference, ours)
        self.assertEqual(len(problems), 1)
        self.assertIn("std_error", problems[0])
        self.assertGreater(worst, 1e-8)

    def test_perturbed_estimate_fails(self):
        ours = dict(self.reference)
        est, se = ours[("abc123", "hc1", "visits")]
        ours[("abc123", "hc1", "visits")] = (-est, se)
        _, _, problems = compare(self.reference, ours)
        self.assertEqual(len(problems), 1)
        self.assertIn("estimate", problems[0])

    def test_missing_value_fails(self):
        ours = dict(self.reference)
        del ours[("abc123", "hc1", "visits")]
        _, _, problems = compare(self.reference, ours)
        self.assertTrue(any("missing" in p for p in problems))

    def test_nan_fails_and_nothing_compared_fails(self):
        ours = dict(self.reference)
        ours[("abc123", "hc1", "visits")] = (math.nan, 0.0024)
        self.assertEqual(len(compare(self.reference, ours)[2]), 1)
        self.assertEqual(len(compare({}, ours)[2]), 1)
        self.assertEqual(relative_difference(math.inf, 1.0), math.inf)


if __name__ == "__main__":
    unittest.main()
