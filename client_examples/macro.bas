Attribute VB_Name = "ConductionService"
' Macro module (Basic) for desktop spreadsheets: posts a problem to the conduction service and
' returns one value, usable as a cell function: =CoverTemperature(0.6, 0.4, 50)
'
' Scenario (invented): the layout sheet of a heat-treatment line sizes the steel lids of its
' quench tanks and shows the lid's centre temperature beside each row.
Option Explicit

Private Const SERVICE_URL As String = "http://127.0.0.1:8000"
Private Const SERVICE_PATH As String = "/v1/plate?select=results.points.0.temperature"
Private Const PROBLEM_JSON As String = "{""width"": {W}, ""height"": {H}, ""conductivity"": {K}, ""edges"": {""bottom"": {""type"": ""temperature"", ""value"": 85}, ""left"": {""type"": ""insulated""}, ""right"": {""type"": ""convection"", ""film_coefficient"": 12, ""ambient"": 20}, ""top"": {""type"": ""convection"", ""film_coefficient"": 8, ""ambient"": 20}}, ""points"": [[{XC}, {YC}]]}"

Private Function Num(ByVal x As Double) As String
    ' JSON needs a dot as decimal mark whatever the regional settings
    Num = Replace(CStr(x), Application.International(xlDecimalSeparator), ".")
End Function

Public Function CoverTemperature(ByVal width As Double, ByVal height As Double, _
                                 ByVal conductivity As Double) As Variant
    Dim body As String, http As Object
    body = Replace(PROBLEM_JSON, "{W}", Num(width))
    body = Replace(body, "{H}", Num(height))
    body = Replace(body, "{K}", Num(conductivity))
    body = Replace(body, "{XC}", Num(width / 2))
    body = Replace(body, "{YC}", Num(height / 2))
    Set http = CreateObject("MSXML2.XMLHTTP")
    http.Open "POST", SERVICE_URL & SERVICE_PATH, False
    http.setRequestHeader "Content-Type", "application/json"
    http.send body
    If http.Status = 200 Then
        CoverTemperature = Val(http.responseText)
    Else
        CoverTemperature = CVErr(xlErrValue)
        Debug.Print "conduction service answered " & http.Status & ": " & http.responseText
    End If
End Function
