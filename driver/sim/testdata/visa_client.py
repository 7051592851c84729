#!/usr/bin/python3
"""Drive rolloff's simulated instruments with PyVISA (pure-Python backend).

Used by driver/sim/interop_test.go to show that the simulated bench answers
a general-purpose SCPI client library, not only rolloff's own drivers.
Usage: visa_client.py GENERATOR_PORT VOLTMETER_PORT
Prints one "key=value" line per answer.
"""
import sys

import pyvisa

gen_port, dcv_port = sys.argv[1], sys.argv[2]
rm = pyvisa.ResourceManager("@py")


def open_socket(port):
    inst = rm.open_resource(f"TCPIP0::127.0.0.1::{port}::SOCKET")
    inst.read_termination = "\n"
    inst.write_termination = "\n"
    inst.timeout = 5000
    return inst


gen = open_socket(gen_port)
print("gen_idn=" + gen.query("*IDN?").strip())
gen.write("*RST;*CLS")
gen.write("SOURce:FREQuency 1000")
gen.write("SOUR:VOLT:UNIT VRMS")
gen.write("SOURce:VOLTage 0.05")
gen.write("OUTPut ON")
print("gen_freq=" + gen.query("FREQ?").strip())
print("gen_outp=" + gen.query("OUTP?").strip())
gen.write("FREQuency:BOGus 5")
print("gen_err=" + gen.query("SYST:ERR?").strip())
print("gen_err2=" + gen.query("SYSTem:ERRor?").strip())

dcv = open_socket(dcv_port)
print("dcv_idn=" + dcv.query("*IDN?").strip())
dcv.write("CONF:VOLT:DC 1")
dcv.write("VOLT:DC:NPLC 1")
print("dcv_read=" + dcv.query("READ?").strip())
gen.write("OUTP OFF")
print("gen_outp_off=" + gen.query("OUTP?").strip())
gen.close()
dcv.close()
