// The residual model behind the four-parameter and joint sine fits, exposed so its analytic
// Jacobian can be checked against finite differences.
#pragma once

#include <span>
#include <vector>

#include "fit/lsq/least_squares.h"

namespace ampbench::fit {

// Channels sharing one frequency. Parameters: freq_hz, then (a, b, offset) per channel for
// a·cos(2πft) + b·sin(2πft) + offset; residuals are weighted by one weight per channel.
class JointSineModel : public ResidualModel {
public:
    struct Channel {
        std::vector<double> t_s, y;
        double weight = 1.0;
    };
    explicit JointSineModel(std::vector<Channel> channels);
    std::size_t residual_count() const override { return count_; }
    void residuals(std::span<const double> p, std::span<double> r) const override;
    bool jacobian(std::span<const double> p, std::span<double> jac) const override;

private:
    std::vector<Channel> channels_;
    std::size_t count_ = 0;
};

}  // namespace ampbench::fit
