package register

// Version is the program version written into every output.
const Version = "0.1.0"
