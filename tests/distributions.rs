//! The t and F distributions behind every p-value and confidence limit,
//! checked against a handbook table and against scipy. (The studentized
//! range has its own tests in src/stats/tukey.rs.)

use covey::model::dist::{f_quantile, f_upper_p, t_quantile, t_two_sided_p};

fn close(a: f64, b: f64, rel: f64) -> bool {
    (a - b).abs() <= rel * b.abs().max(f64::MIN_POSITIVE)
}

/// Two-sided 5% critical values of t, as printed to three decimals in the
/// t table of standard handbooks (e.g. Fisher & Yates, Statistical Tables,
/// Table III); values from memory.
#[test]
fn t_critical_values_match_the_handbook_table() {
    let table = [
        (1, 12.706),
        (2, 4.303),
        (5, 2.571),
        (10, 2.228),
        (20, 2.086),
        (30, 2.042),
        (60, 2.000),
        (120, 1.980),
    ];
    for (df, printed) in table {
        let q = t_quantile(0.975, df);
        assert!(
            (q - printed).abs() <= 0.0005,
            "t(0.975; {df}) = {q}, table {printed}"
        );
    }
}

/// Upper 5% and 1% points of F, as printed in handbook F tables (e.g.
/// Pearson & Hartley, Biometrika Tables for Statisticians, Vol. 1, Table
/// 18); values from memory.
#[test]
fn f_critical_values_match_the_handbook_table() {
    let table = [
        (1, 10, 4.96, 10.04),
        (2, 20, 3.49, 5.85),
        (3, 30, 2.92, 4.51),
        (5, 60, 2.37, 3.34),
        (4, 12, 3.26, 5.41),
        (2, 120, 3.07, 4.79),
    ];
    for (d1, d2, five, one) in table {
        assert!(
            (f_quantile(0.95, d1, d2) - five).abs() <= 0.005,
            "F(0.95; {d1}, {d2})"
        );
        assert!(
            (f_quantile(0.99, d1, d2) - one).abs() <= 0.005,
            "F(0.99; {d1}, {d2})"
        );
    }
}

/// scipy 1.17.1: stats.t.ppf(0.975, df), 2 * stats.t.sf(2.5, df),
/// 2 * stats.t.sf(8.0, df).
#[test]
fn t_matches_scipy() {
    let rows = [
        (
            1,
            12.706204736174694,
            0.24223788318168682,
            0.07916684832113109,
        ),
        (
            2,
            4.302652729749462,
            0.12961172022151082,
            0.01526807216533814,
        ),
        (
            5,
            2.5705818356363146,
            0.05449009934237626,
            0.0004929066605724442,
        ),
        (
            10,
            2.228138851986274,
            0.03144684423660882,
            1.1774942789666167e-05,
        ),
        (
            20,
            2.085963447265864,
            0.02123354543913238,
            1.165662827148851e-07,
        ),
        (
            30,
            2.0422724563012378,
            0.01811564906806669,
            6.265822475700759e-09,
        ),
        (
            60,
            2.0002978220142604,
            0.015170780234888529,
            4.900265147950212e-11,
        ),
        (
            120,
            1.9799304050824402,
            0.013769534925030417,
            8.833425662830027e-13,
        ),
        (
            1000,
            1.9623390808264083,
            0.012578567801090807,
            3.4266614823914978e-15,
        ),
    ];
    for (df, q, p25, p8) in rows {
        assert!(close(t_quantile(0.975, df), q, 1e-9), "quantile df {df}");
        assert!(close(t_two_sided_p(2.5, df), p25, 1e-9), "p(2.5) df {df}");
        assert!(close(t_two_sided_p(8.0, df), p8, 1e-6), "p(8) df {df}");
    }
}

/// scipy 1.17.1: stats.f.ppf(0.95, d1, d2), stats.f.ppf(0.99, d1, d2),
/// stats.f.sf(3.0, d1, d2), stats.f.sf(40.0, d1, d2).
#[test]
fn f_matches_scipy() {
    let rows = [
        (
            1,
            10,
            4.964602743730711,
            10.04428927339658,
            0.1139374121519203,
            8.630216153154252e-05,
        ),
        (
            2,
            20,
            3.4928284767356312,
            5.848931924611135,
            0.07253815028640571,
            1.0240000000000006e-07,
        ),
        (
            3,
            30,
            2.9222771906450373,
            4.509739562459062,
            0.04606434054221054,
            1.3227357450572035e-10,
        ),
        (
            5,
            60,
            2.368270235701072,
            3.3388844224495315,
            0.017532380662433,
            7.068285549476826e-18,
        ),
        (
            4,
            12,
            3.2591667269012494,
            5.411951434473138,
            0.0625,
            7.589877645235568e-07,
        ),
        (
            2,
            120,
            3.071779404658684,
            4.78650973966258,
            0.053535523746494305,
            4.88736779806891e-14,
        ),
        (
            10,
            1000,
            1.8401544028743602,
            2.3386323158013647,
            0.0009673991787112392,
            1.5586553905237003e-66,
        ),
    ];
    for (d1, d2, q95, q99, p3, p40) in rows {
        assert!(
            close(f_quantile(0.95, d1, d2), q95, 1e-8),
            "F q95 {d1},{d2}"
        );
        assert!(
            close(f_quantile(0.99, d1, d2), q99, 1e-8),
            "F q99 {d1},{d2}"
        );
        assert!(close(f_upper_p(3.0, d1, d2), p3, 1e-9), "F p(3) {d1},{d2}");
        assert!(
            close(f_upper_p(40.0, d1, d2), p40, 1e-6),
            "F p(40) {d1},{d2}"
        );
    }
}
