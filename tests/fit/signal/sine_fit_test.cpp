// Sine fits: exactness on clean records, the Cramér–Rao bound in Monte Carlo, four-parameter
// convergence range, the joint two-channel fit, harmonics and THD, and bad input.
#include <catch2/catch.hpp>

#include <cmath>
#include <numbers>
#include <vector>

#include "core/errors.h"
#include "core/random.h"
#include "fit/signal/sine_fit.h"
#include "fit/signal/sine_model.h"

using namespace ampbench;
using namespace ampbench::fit;

namespace {

constexpr double pi = std::numbers::pi;

SampleRecord make_record(std::size_t n, double dt, double f, double amp, double phase, double offset,
                         double noise_sd, Random* rng, double harmonic2 = 0, double harmonic3 = 0) {
    SampleRecord r;
    r.dt_s = dt;
    for (std::size_t k = 0; k < n; ++k) {
        const double w = 2 * pi * f * static_cast<double>(k) * dt;
        double y = amp * std::cos(w + phase) + offset + harmonic2 * std::cos(2 * w + 0.3) +
                   harmonic3 * std::cos(3 * w - 1.1);
        if (rng) y += rng->normal(0.0, noise_sd);
        r.samples.push_back(y);
    }
    return r;
}

double sample_sd(const std::vector<double>& v) {
    double mean = 0;
    for (double x : v) mean += x;
    mean /= static_cast<double>(v.size());
    double ss = 0;
    for (double x : v) ss += (x - mean) * (x - mean);
    return std::sqrt(ss / static_cast<double>(v.size() - 1));
}

double wrap(double x) { return std::remainder(x, 2 * pi); }

}  // namespace

TEST_CASE("three-parameter fit recovers a clean sine and skips clipped samples", "[signal]") {
    SampleRecord r = make_record(400, 1e-5, 1250.0, 0.8, 0.7, 0.05, 0, nullptr);
    // Flatten the top of the waveform as a digitiser at its rail would, and flag it.
    r.clipped.assign(r.samples.size(), false);
    std::size_t flagged = 0;
    for (std::size_t k = 0; k < r.samples.size(); ++k)
        if (r.samples[k] > 0.7) {
            r.samples[k] = 0.7;
            r.clipped[k] = true;
            ++flagged;
        }
    REQUIRE(flagged > 10);
    const SineEstimate e = fit_sine_known_freq(r, 1250.0);
    CHECK(e.usable());
    CHECK(e.amplitude == Approx(0.8).epsilon(1e-9));
    CHECK(e.phase_rad == Approx(0.7).epsilon(1e-9));
    CHECK(e.offset == Approx(0.05).epsilon(1e-8));
    CHECK(e.clipped_samples == flagged);
    CHECK(e.used_samples == 400 - flagged);

    const SineEstimate four = fit_sine(r);
    CHECK(four.freq_hz == Approx(1250.0).epsilon(1e-9));
    CHECK(four.amplitude == Approx(0.8).epsilon(1e-8));
    CHECK(four.clipped_samples == flagged);
}

TEST_CASE("sine-fit spread reaches the Cramér–Rao bound (Monte Carlo, 500 trials)", "[signal][reference]") {
    const std::size_t n = 256;
    const double dt = 1.0 / 25600.0, f = 1000.0;  // exactly 10 periods
    const double amp = 1.0, sigma = 0.05;
    Random rng(20240611);
    std::vector<double> a3, p3, a4, p4, f4;
    double reported_a = 0, reported_p = 0;
    for (int trial = 0; trial < 500; ++trial) {
        const double phase = rng.uniform(-pi, pi);
        const SampleRecord r = make_record(n, dt, f, amp, phase, 0.1, sigma, &rng);
        const SineEstimate e3 = fit_sine_known_freq(r, f);
        a3.push_back(e3.amplitude);
        p3.push_back(wrap(e3.phase_rad - phase));
        reported_a += e3.amplitude_sd / 500;
        reported_p += e3.phase_rad_sd / 500;
        const SineEstimate e4 = fit_sine(r);
        REQUIRE(e4.usable());
        a4.push_back(e4.amplitude);
        f4.push_back(e4.freq_hz);
    }
    const double nd = static_cast<double>(n);
    // Source: IEEE Std 1057 / REFERENCES.md (from memory): var(A) ≥ 2σ²/N, var(φ) ≥ 2σ²/(N·A²)
    const double crb_a = std::sqrt(2 * sigma * sigma / nd);
    const double crb_p = std::sqrt(2 * sigma * sigma / (nd * amp * amp));
    CHECK(sample_sd(a3) == Approx(crb_a).epsilon(0.10));
    CHECK(sample_sd(p3) == Approx(crb_p).epsilon(0.10));
    CHECK(reported_a == Approx(crb_a).epsilon(0.10));
    CHECK(reported_p == Approx(crb_p).epsilon(0.10));
    // The amplitude bound holds with the frequency unknown too (amplitude decouples from
    // frequency over whole periods).
    CHECK(sample_sd(a4) == Approx(crb_a).epsilon(0.10));
    // from memory: CRB for the frequency of a real sinusoid, var(ω) ≥ 24σ²/(A²·N·(N²−1)) in
    // rad/sample (Rife & Boorstyn 1974, real-signal form).
    const double crb_w = std::sqrt(24 * sigma * sigma / (amp * amp * nd * (nd * nd - 1)));
    CHECK(sample_sd(f4) == Approx(crb_w / (2 * pi * dt)).epsilon(0.10));
}

TEST_CASE("four-parameter fit converges from ±0.4 bin of frequency error", "[signal]") {
    const std::size_t n = 500;
    const double dt = 1e-4;
    const double bin_hz = 1.0 / (static_cast<double>(n) * dt);
    Random rng(77);
    for (double f : {123.4, 400.0, 1717.7, 3999.0}) {
        for (double offset_bins : {-0.4, 0.4}) {
            const SampleRecord r = make_record(n, dt, f, 0.3, 1.0, 0, 0.003, &rng);
            const SineEstimate e = fit_sine(r, f + offset_bins * bin_hz);
            INFO("f " << f << " start offset " << offset_bins << " bins: " << e.message);
            REQUIRE(e.usable());
            CHECK(std::abs(e.freq_hz - f) < 5 * e.freq_hz_sd);
            CHECK(e.amplitude == Approx(0.3).epsilon(0.01));
        }
    }
}

TEST_CASE("interpolated FFT peak lands within a tenth of a bin", "[signal]") {
    const std::size_t n = 1000;
    const double dt = 1e-4;
    for (double f : {50.0, 333.3, 1234.5, 4321.0}) {
        const SampleRecord r = make_record(n, dt, f, 1.0, 0.2, 0.5, 0, nullptr);
        CHECK(std::abs(estimate_frequency(r) - f) < 0.1 / (static_cast<double>(n) * dt));
    }
}

TEST_CASE("joint fit gives amplitude ratio and phase difference with honest uncertainties", "[signal]") {
    const std::size_t n = 400;
    const double dt = 2e-6, f = 10'123.0;
    Random rng(5);
    std::vector<double> ratio, dphi;
    double reported_ratio_sd = 0, reported_phase_sd = 0;
    const int trials = 200;
    for (int t = 0; t < trials; ++t) {
        const double phase = rng.uniform(-pi, pi);
        const SampleRecord in = make_record(n, dt, f, 0.05, phase, 0.0, 0.001, &rng);
        const SampleRecord out = make_record(n, dt, f, 2.5, phase + pi * 150.0 / 180.0, 0.02, 0.01, &rng);
        const JointSineEstimate e = fit_sine_joint({in, out});
        REQUIRE(e.usable());
        REQUIRE(e.channels.size() == 2);
        ratio.push_back(e.amplitude_ratio[1]);
        dphi.push_back(e.phase_diff_rad[1]);
        reported_ratio_sd += e.amplitude_ratio_sd[1] / trials;
        reported_phase_sd += e.phase_diff_rad_sd[1] / trials;
    }
    double mean_ratio = 0, mean_phase = 0;
    for (int t = 0; t < trials; ++t) {
        mean_ratio += ratio[static_cast<std::size_t>(t)] / trials;
        mean_phase += dphi[static_cast<std::size_t>(t)] / trials;
    }
    CHECK(mean_ratio == Approx(50.0).epsilon(1e-3));
    CHECK(mean_phase == Approx(pi * 150.0 / 180.0).epsilon(1e-3));
    // The reported uncertainty matches the observed scatter (200 trials: ±15 % allows for
    // the sampling error of a standard deviation, about 5 %).
    CHECK(reported_ratio_sd == Approx(sample_sd(ratio)).epsilon(0.15));
    CHECK(reported_phase_sd == Approx(sample_sd(dphi)).epsilon(0.15));
}

TEST_CASE("harmonic fit measures THD of a signal with two known harmonics within 0.1 dB", "[signal]") {
    Random rng(9);
    const double h2 = 0.01, h3 = 0.005;
    const SampleRecord r = make_record(2000, 1e-5, 997.0, 1.0, 0.4, 0.0, 0.002, &rng, h2, h3);
    const HarmonicEstimate e = fit_harmonics(r, 5);
    REQUIRE(e.usable());
    // common practice: THD = sqrt(Σ_{h≥2} A_h²) / A_1
    const double truth_db = 20 * std::log10(std::sqrt(h2 * h2 + h3 * h3) / 1.0);
    CHECK(std::abs(e.thd_db - truth_db) < 0.1);
    CHECK(e.amplitude[1] == Approx(h2).epsilon(0.05));
    CHECK(e.amplitude[2] == Approx(h3).epsilon(0.1));
    CHECK(e.thd_db_sd > 0);
    CHECK(e.thd_db_sd < 0.1);
}

TEST_CASE("joint sine model Jacobian agrees with finite differences", "[signal]") {
    JointSineModel::Channel a{{0, 1e-3, 2e-3, 3e-3, 4e-3}, {0.1, 0.5, -0.2, 0.3, 0.0}, 2.0};
    JointSineModel::Channel b{{0, 1e-3, 2e-3, 3e-3, 4e-3}, {1.0, -0.5, 0.2, 0.7, 0.1}, 0.5};
    const JointSineModel model({a, b});
    const std::vector<double> p = {137.0, 0.4, -0.3, 0.05, 1.2, 0.8, -0.1};
    std::vector<double> jac(model.residual_count() * p.size());
    REQUIRE(model.jacobian(p, jac));
    const std::vector<double> num = numeric_jacobian(model, p);
    for (std::size_t i = 0; i < jac.size(); ++i) CHECK(jac[i] == Approx(num[i]).margin(1e-7).epsilon(1e-6));
}

TEST_CASE("sine fits refuse bad records with one clear line", "[signal]") {
    SampleRecord r = make_record(100, 1e-3, 10, 1, 0, 0, 0, nullptr);
    SampleRecord bad_dt = r;
    bad_dt.dt_s = 0;
    CHECK_THROWS_AS(fit_sine_known_freq(bad_dt, 10), FitInputError);
    SampleRecord all_clipped = r;
    all_clipped.clipped.assign(r.samples.size(), true);
    CHECK_THROWS_WITH(fit_sine(all_clipped), Catch::Contains("100 clipped"));
    SampleRecord wrong_flags = r;
    wrong_flags.clipped.assign(3, false);
    CHECK_THROWS_AS(fit_sine(wrong_flags), FitInputError);
    CHECK_THROWS_AS(fit_sine_known_freq(r, -1), FitInputError);
    CHECK_THROWS_AS(fit_harmonics(r, 0), FitInputError);
    CHECK_THROWS_WITH(fit_harmonics(r, 60, 10.0), Catch::Contains("Nyquist"));
}
