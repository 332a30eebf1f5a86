// Serial port discovery through libserialport (it cannot open pseudo-terminals, so I/O is
// elsewhere): what `ampbench ports` lists and how serial://usb-serial=... finds its device.
#pragma once

#include <optional>
#include <string>
#include <vector>

namespace ampbench::drivers {

struct SerialPortInfo {
    std::string device;       // /dev/ttyUSB0
    std::string description;
    std::string transport;    // "usb", "native", "bluetooth"
    std::optional<int> usb_vendor, usb_product;
    std::string usb_serial;
    std::string manufacturer, product;
};

// ConnectionError if libserialport cannot enumerate.
std::vector<SerialPortInfo> list_serial_ports();
// The device of the port whose USB serial number is `usb_serial`; ConnectionError if none.
std::string find_port_by_usb_serial(const std::string& usb_serial);

}  // namespace ampbench::drivers
