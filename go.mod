module splitledger

go 1.26.8
