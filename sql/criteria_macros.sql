-- Formulas of a criteria set, as DuckDB macros (AASHTO Green Book ch. 3 form; the constants
-- come from the set's row in criteria/sets.csv, registered as table `cset`).
-- All in the set's own units (metric: m, km/h; us: ft, mph).

-- calculated stopping sight distance on the level
CREATE OR REPLACE MACRO ssd_level(v, t, a, speed_coef, braking_coef) AS
    speed_coef * v * t + braking_coef * v * v / a;

-- calculated stopping sight distance on grade g (fraction, negative downhill)
CREATE OR REPLACE MACRO ssd_on_grade(v, t, a, g, gravity, speed_coef, grade_coef) AS
    speed_coef * v * t + v * v / (grade_coef * (a / gravity + g));

-- design value: the calculated value rounded up to the set's step
CREATE OR REPLACE MACRO round_up(x, step) AS ceil(x / step - 1e-9) * step;

-- design K: calculated K to 0.1, rounded up to a whole number
CREATE OR REPLACE MACRO k_round(k) AS ceil(round(k, 1) - 1e-9);

-- highest speed whose calculated SSD sight distance s meets: positive root of
-- quad * v^2 + lin * v - s = 0
CREATE OR REPLACE MACRO speed_for_sight(s, lin, quad) AS
    (-lin + sqrt(lin * lin + 4 * quad * s)) / (2 * quad);

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
