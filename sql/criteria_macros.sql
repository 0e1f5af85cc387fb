-- Macros for the SQL rules. The criteria set's formulas (ssd_level, ssd_on_grade, round_up,
-- k_round, speed_for_sight) are written once, in pipeline/evaluate/formulas.py, and registered
-- as functions on the connection before these files run; the set's constants come from its row
-- in criteria/sets.csv, registered as table `cset`.

-- standard normal distribution function Phi(z), from the error function by the rational
-- approximation of Abramowitz & Stegun (1964), Handbook of Mathematical Functions, 7.1.26
-- (absolute error below 1.5e-7)
CREATE OR REPLACE MACRO erf_as(x, t) AS
    1 - t * (0.254829592 + t * (-0.284496736 + t * (1.421413741 + t * (-1.453152027 + t * 1.061405429))))
        * exp(-x * x);
CREATE OR REPLACE MACRO erf_abs(x) AS erf_as(abs(x), 1.0 / (1.0 + 0.3275911 * abs(x)));
CREATE OR REPLACE MACRO normal_cdf(z) AS
    CASE WHEN z IS NULL OR isnan(z) THEN NULL
         WHEN z >= 0 THEN 0.5 * (1 + erf_abs(z / sqrt(2.0)))
         ELSE 0.5 * (1 - erf_abs(z / sqrt(2.0))) END;
