// Power sequencing (DESIGN.md §6): the order of switching, the quiescent-current window and the
// reverse order on every way out.
#include "cli/procedures/power.h"

#include <cctype>
#include <cmath>
#include <istream>
#include <ostream>

#include <fmt/format.h>

#include "core/errors.h"
#include "core/interrupt.h"
#include "core/value.h"

namespace ampbench::procedures {

std::string PowerPlan::validate() const {
    if (!(supply_volts > 0) || !std::isfinite(supply_volts)) return "supply_volts must be positive";
    if (!(current_limit_a > 0) || !std::isfinite(current_limit_a)) return "current_limit_a must be positive";
    if (!(abort_above > 1.0)) return "abort_above must exceed 1";
    if (!(abort_below >= 0.0 && abort_below < 1.0)) return "abort_below must lie in [0, 1)";
    if (!(settle_s >= 0.0)) return "settle_s must not be negative";
    return {};
}

PowerSequence::PowerSequence(drivers::Generator* generator, drivers::Supply* supply, Clock& clock, PowerPlan plan)
    : generator_(generator), supply_(supply), clock_(clock), plan_(plan) {
    if (std::string why = plan_.validate(); !why.empty()) throw SafetyStop("power plan: " + why);
}

PowerSequence::~PowerSequence() { power_down(); }

void PowerSequence::power_up() {
    touched_ = true;
    try {
        if (generator_) {
            generator_->set_output(false);
            generator_on_ = false;
        }
        throw_if_interrupted();
        if (supply_) {
            supply_->set_voltage(plan_.supply_volts);
            limit_read_back_a_ = supply_->set_current_limit(plan_.current_limit_a);
            throw_if_interrupted();
            supply_on_ = true;  // set before the command: a half-done switch-on must still be undone
            supply_->output_on();
            clock_.sleep_s(plan_.settle_s);
            throw_if_interrupted();
            quiescent_a_ = supply_->measure_current();
            const double predicted = plan_.predicted_quiescent_a;
            if (predicted > 0) {
                const double ratio = quiescent_a_ / predicted;
                if (!(ratio <= plan_.abort_above) || ratio < plan_.abort_below)
                    throw SafetyStop(fmt::format(
                        "quiescent current {} is {:.2f}× the predicted {} (allowed {:.2f}× to {:.2f}×); "
                        "board powered down",
                        format_eng(quiescent_a_, "A"), ratio, format_eng(predicted, "A"), plan_.abort_below,
                        plan_.abort_above));
            }
        }
    } catch (...) {
        power_down();
        throw;
    }
}

void PowerSequence::generator_on() {
    if (!touched_) throw SafetyStop("generator switched on before the board was powered in order");
    throw_if_interrupted();
    if (!generator_) return;
    generator_on_ = true;
    try {
        generator_->set_output(true);
    } catch (...) {
        power_down();
        throw;
    }
}

std::vector<std::string> PowerSequence::power_down() noexcept {
    std::vector<std::string> found;
    if (!touched_) return found;
    try {
        if (generator_) generator_->set_output(false);
        generator_on_ = false;
    } catch (const std::exception& e) {
        found.push_back(fmt::format("generator: output off failed: {}", e.what()));
    }
    try {
        if (supply_) supply_->output_off();  // also when it was left on by an earlier run
        supply_on_ = false;
    } catch (const std::exception& e) {
        found.push_back(fmt::format("supply: output off failed: {}", e.what()));
    }
    touched_ = false;
    for (const auto& p : found) problems_.push_back(p);
    return found;
}

std::string safety_notice(double current_limit_a) {
    return fmt::format(
        "Safety notice\n"
        "  * The supply is limited to {} and the limit is read back before the board is powered.\n"
        "  * On a mains-referenced circuit the scope's ground leads are tied to protective earth:\n"
        "    clip them only to nodes that are at earth potential, or use differential probes.\n"
        "  * Large capacitors can stay charged after power is removed; discharge them before\n"
        "    touching the board.\n"
        "  * Loose transistors are sensitive to electrostatic discharge: use a wrist strap and mat.\n"
        "  These notes do not replace local electrical codes or your lab's safety rules; follow those.\n",
        format_eng(current_limit_a, "A"));
}

void confirm_or_stop(std::ostream& out, std::istream& in, const std::string& notice, const std::string& question,
                     const std::string& refusal, bool assume_yes) {
    out << notice;
    if (assume_yes) return;
    out << question << " [y/N] " << std::flush;
    std::string answer;
    if (!std::getline(in, answer)) answer.clear();
    while (!answer.empty() && std::isspace(static_cast<unsigned char>(answer.back()))) answer.pop_back();
    if (answer != "y" && answer != "Y" && answer != "yes" && answer != "YES" && answer != "Yes") throw SafetyStop(refusal);
}

void confirm_safety(std::ostream& out, std::istream& in, double current_limit_a, bool assume_yes) {
    confirm_or_stop(out, in, safety_notice(current_limit_a), "Power the board now?",
                    "not confirmed: the board was not powered (pass --yes to skip the question)", assume_yes);
}

std::string match_notice(double level_vpp) {
    return fmt::format(
        "Channel match\n"
        "  * Clip both probes to the same node: the generator output (a T-piece or a short lead), or\n"
        "    a board's input with the board unpowered. Both ground leads go to the same ground point.\n"
        "  * No supply is switched on. The generator output is switched on at {} and off again at\n"
        "    the end, on an error and on Ctrl-C.\n"
        "  * On a mains-referenced circuit the scope's ground leads are tied to protective earth:\n"
        "    clip them only to nodes that are at earth potential.\n"
        "  These notes do not replace local electrical codes or your lab's safety rules; follow those.\n",
        format_eng(level_vpp, "Vpp"));
}

}  // namespace ampbench::procedures
