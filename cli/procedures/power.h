// Power sequencing of DESIGN.md §6 as one object: power_up() runs generator off → supply limit set
// and read back → supply on → quiescent check → generator on; power_down() (and the destructor,
// on every exit path) reverses it: generator off, then supply off.
#pragma once
#include <functional>
#include <iosfwd>
#include <string>
#include <vector>

#include "core/clock.h"
#include "drivers/roles/generator.h"
#include "drivers/roles/supply.h"

namespace ampbench::procedures {

struct PowerPlan {
    double supply_volts = 12.0;
    double current_limit_a = 0.05;
    double predicted_quiescent_a = 0.0;  // the prediction's supply current
    double abort_above = 1.5;            // quiescent / predicted beyond this is a SafetyStop
    double abort_below = 0.5;            // ... and under this
    double settle_s = 0.5;               // wait after switching the supply on, before measuring
    std::string validate() const;        // empty when valid
};

class PowerSequence {
public:
    // Either instrument may be null (a bench without a generator or supply); `clock` times the waits.
    PowerSequence(drivers::Generator* generator, drivers::Supply* supply, Clock& clock, PowerPlan plan);
    ~PowerSequence();
    PowerSequence(const PowerSequence&) = delete;
    PowerSequence& operator=(const PowerSequence&) = delete;

    // Everything up to, not including, the generator's output; SafetyStop (after powering down)
    // when the quiescent current is out of its window. Polls Ctrl-C between steps.
    void power_up();
    // Generator output on (only after power_up()).
    void generator_on();
    // Generator off, then supply off; each attempted even if the other fails; never throws.
    // Returns the problems met (also kept in problems()).
    std::vector<std::string> power_down() noexcept;

    double quiescent_a() const { return quiescent_a_; }
    double limit_read_back_a() const { return limit_read_back_a_; }
    bool powered() const { return supply_on_; }
    const std::vector<std::string>& problems() const { return problems_; }

private:
    drivers::Generator* generator_;
    drivers::Supply* supply_;
    Clock& clock_;
    PowerPlan plan_;
    bool supply_on_ = false, generator_on_ = false, touched_ = false;
    double quiescent_a_ = 0.0, limit_read_back_a_ = 0.0;
    std::vector<std::string> problems_;
};

// The cautions printed before a board is powered (DESIGN.md §6).
std::string safety_notice(double current_limit_a);

// Prints the notice and asks on `in` unless assume_yes; SafetyStop when the answer is not yes.
void confirm_safety(std::ostream& out, std::istream& in, double current_limit_a, bool assume_yes);
// The same for any notice: prints it, asks `question` unless assume_yes, SafetyStop(refusal) on no.
void confirm_or_stop(std::ostream& out, std::istream& in, const std::string& notice, const std::string& question,
                     const std::string& refusal, bool assume_yes);
// The cautions printed before a channel-match run (generator only, no board power).
std::string match_notice(double level_vpp);

}  // namespace ampbench::procedures
