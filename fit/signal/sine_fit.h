// IEEE 1057 sine fits of sampled records: three-parameter (known frequency), four-parameter
// (frequency estimated), a joint fit of several channels sharing one frequency, and harmonics.
#pragma once

#include <cstddef>
#include <optional>
#include <string>
#include <vector>

#include "fit/lsq/least_squares.h"

namespace ampbench::fit {

// One channel's capture: sample k was taken at t0_s + k·dt_s. A true entry of `clipped` marks a
// sample at the digitiser's rail; such samples are left out of every fit and counted.
struct SampleRecord {
    std::vector<double> samples;
    double dt_s = 0.0;
    double t0_s = 0.0;
    std::vector<bool> clipped;  // empty, or one flag per sample
};

// y(t) = amplitude·cos(2π·freq_hz·t + phase_rad) + offset, with standard uncertainties from the
// residual variance and the fit's covariance.
struct SineEstimate {
    FitStatus status = FitStatus::diverged;
    std::string message;
    double freq_hz = 0.0, freq_hz_sd = 0.0;  // sd 0 for a three-parameter fit
    double amplitude = 0.0, amplitude_sd = 0.0;
    double phase_rad = 0.0, phase_rad_sd = 0.0;  // (−π, π], referred to t = 0
    double offset = 0.0, offset_sd = 0.0;
    double residual_rms = 0.0;
    std::size_t used_samples = 0, clipped_samples = 0;
    bool usable() const { return status == FitStatus::converged; }
};

// IEEE Std 1057 three-parameter fit at a known frequency (linear least squares).
// FitInputError when fewer than 4 unclipped samples remain or dt_s is not positive.
SineEstimate fit_sine_known_freq(const SampleRecord& record, double freq_hz);

// IEEE Std 1057 four-parameter fit. Without a guess the start is the interpolated peak of a
// Hann-windowed FFT; the fit converges from up to about half a bin of frequency error.
SineEstimate fit_sine(const SampleRecord& record, std::optional<double> freq_guess_hz = {});

// Frequency of the strongest non-DC component by an interpolated FFT peak.
double estimate_frequency(const SampleRecord& record);

struct ChannelSine {
    double amplitude = 0.0, amplitude_sd = 0.0;
    double phase_rad = 0.0, phase_rad_sd = 0.0;
    double offset = 0.0, offset_sd = 0.0;
    double residual_rms = 0.0;
    std::size_t used_samples = 0, clipped_samples = 0;
};

// Channels fitted together with one shared frequency; ratio and phase difference of channel k
// against channel 0 come with uncertainties that include the correlations of the joint fit.
struct JointSineEstimate {
    FitStatus status = FitStatus::diverged;
    std::string message;
    double freq_hz = 0.0, freq_hz_sd = 0.0;
    std::vector<ChannelSine> channels;
    std::vector<double> amplitude_ratio, amplitude_ratio_sd;  // [0] is 1 ± 0
    std::vector<double> phase_diff_rad, phase_diff_rad_sd;    // channel k − channel 0, (−π, π]
    bool usable() const { return status == FitStatus::converged; }
};

// All records must share dt_s, t0_s and length. The frequency comes from channel 0 unless given.
JointSineEstimate fit_sine_joint(const std::vector<SampleRecord>& records,
                                 std::optional<double> freq_guess_hz = {});

// Fundamental and harmonics 2..k at a known (or first estimated) fundamental frequency.
struct HarmonicEstimate {
    FitStatus status = FitStatus::diverged;
    double freq_hz = 0.0;
    // Index 0 is the fundamental, index h−1 the h-th harmonic.
    std::vector<double> amplitude, amplitude_sd, phase_rad, phase_rad_sd;
    double offset = 0.0;
    double thd_ratio = 0.0, thd_ratio_sd = 0.0;  // sqrt(Σ_{h≥2} A_h²) / A_1
    double thd_db = 0.0, thd_db_sd = 0.0;
    double residual_rms = 0.0;
    std::size_t used_samples = 0, clipped_samples = 0;
    bool usable() const { return status == FitStatus::converged; }
};

HarmonicEstimate fit_harmonics(const SampleRecord& record, int harmonics,
                               std::optional<double> freq_hz = {});

}  // namespace ampbench::fit
