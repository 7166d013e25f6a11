"""Transport: where bytes come from -- serial ports, network bridges and test URLs, through pyserial."""
